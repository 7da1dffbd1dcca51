import { sql } from 'drizzle-orm'
import type { EngineResult } from '#shared/engine'
import { acquisitionRuns, acquisitions, events, labs, peaks, results, uploads } from '../../database/schema'
import type { Outcome } from '../../utils/turnBatch'
import { fanOut } from '../delivery'
import type { AcquisitionHead, AcquisitionResultView } from '../results'
import type { PayloadRef } from '../store'

// Writing accepted acquisitions. Every acquisition accepted in the same turn of the event
// loop is written by ONE statement (one implicit transaction, one commit): its acquisition
// row, result (held for review, or released by the lab's automatic rule), peaks and, for a
// released result only, the `result.released` outbox event and the deliveries it owes. A group commit: under
// load, the statement's fixed costs (executor start-up, the locks on some twenty relations
// and indexes, the WAL flush at commit, the round trip) are paid once for the group, not
// once per acquisition (batchPerTurn). The acquisition's run id goes into acquisition_runs in
// the same statement (run ids unique per lab across months: acquisitions are partitioned by
// month, drizzle/0021), and its created_at (the `at` below, from a JS Date, so exact to the
// millisecond) is the partition key of its result and peaks.

// Partners hear of a result when it is released; a held one waits for the lab's reviewer
// (server/services/review), who emits the same event on release.
const RESULT_EVENT = 'result.released'

export interface AcceptedEntry {
  acq: AcquisitionHead
  res: typeof results.$inferSelect
  /**
   * The body as JSON text, or the deferred upload whose stored body becomes the payload (the
   * store off); or the references of its raw data in the object store.
   */
  payload: { json: string } | { uploadId: string } | { ref: PayloadRef }
  peaks: EngineResult['peaks']
  view: AcquisitionResultView
}

// A group is also bounded by size, so 10^5-point bodies do not make one huge statement.
const MAX_GROUP = 16
const MAX_GROUP_BYTES = 4 * 1024 * 1024

const sizeOf = (entry: AcceptedEntry) => 'json' in entry.payload ? entry.payload.json.length : 0

/** Writes one accepted acquisition (with whatever else was accepted in this turn); resolves once committed. */
export const recordAccepted = batchPerTurn<AcceptedEntry, undefined>(async (entries) => {
  const outcomes: Promise<Outcome<undefined>[]>[] = []
  for (let start = 0; start < entries.length;) {
    let end = start + 1
    let bytes = sizeOf(entries[start]!)
    while (end < entries.length && end - start < MAX_GROUP && bytes + sizeOf(entries[end]!) <= MAX_GROUP_BYTES) bytes += sizeOf(entries[end++]!)
    outcomes.push(write(entries.slice(start, end)))
    start = end
  }
  return (await Promise.all(outcomes)).flat()
})

async function write(group: AcceptedEntry[]): Promise<Outcome<undefined>[]> {
  try {
    await useDb().execute(acceptedStatement(group))
    return group.map(() => ({ value: undefined }))
  }
  catch (error) {
    if (group.length === 1) return [{ error }]
    // The statement wrote nothing. One entry's failure (its run id sent twice at once, a
    // deadlock with another group) must not fail the others: each is written alone.
    return (await Promise.all(group.map(entry => write([entry])))).flat()
  }
}

/**
 * One statement for a group. The entries travel as one JSON array whose payloads, summaries
 * and views are spliced in as text, never parsed and serialised again.
 *
 * Only released results (`owed`) get an event. Events are numbered per lab under the lab
 * row's lock, so a lab's events commit in the order of their numbers and the pull feed's
 * per-lab cursor never skips one. Inside one
 * statement that lock is held only until its own commit, never across a round trip.
 *
 * Order matters: PostgreSQL runs a data-modifying WITH clause when its output is first read,
 * and one nobody reads only after the main query. `locked` reads `written`, so the heavy part
 * (the payloads' jsonb and TOAST compression, the peaks) is written before any lab row is
 * locked, and it locks the group's labs in id order, so two groups cannot deadlock on them.
 * Written the other way round, every acquisition of a lab waited for the whole insert of the
 * one before it (pg_stat_statements in bench:ingest; DEVELOPERS.md, Measured).
 */
function acceptedStatement(entries: AcceptedEntry[]) {
  const items = entries.map(({ acq, res, payload, peaks: found, view }) => {
    const m = {
      acqId: acq.id, resId: res.id, labId: acq.labId, instrumentId: acq.instrumentId, runId: acq.externalId,
      acquiredAt: acq.acquiredAt.toISOString(), sampleRef: acq.sampleRef, bodyHash: acq.bodyHash, pointCount: acq.pointCount,
      at: acq.createdAt.toISOString(), geometryVersionId: res.geometryVersionId, calibrationId: res.calibrationId, engineVersion: res.engineVersion,
      uploadId: 'uploadId' in payload ? payload.uploadId : null,
      ref: 'ref' in payload ? payload.ref : null,
      submittedBy: acq.submittedBy, requestId: acq.requestId, reviewState: res.reviewState, releasedAt: res.releasedAt?.toISOString() ?? null,
    }
    const peakRows = found.map(p => ({ mz: p.centroid, area: p.area, species: p.assignment?.species ?? null, charge: p.assignment?.z ?? null }))
    const body = 'json' in payload ? `,"payload":${payload.json}` : ''
    return `{"m":${JSON.stringify(m)}${body},"summary":${JSON.stringify(res.summary)},"view":${JSON.stringify(view)},"peaks":${JSON.stringify(peakRows)}}`
  })
  return sql`
    with input as (
      select t.ord, t.r->'m' as m, t.r->'payload' as payload, t.r->'summary' as summary, t.r->'view' as view, t.r->'peaks' as peaks
      from jsonb_array_elements(${`[${items.join(',')}]`}::jsonb) with ordinality as t(r, ord)),
    acq as (
      insert into ${acquisitions} (id, lab_id, instrument_id, external_id, acquired_at, sample_ref, status, body_hash, payload, point_count, submitted_by, created_at,
        raw_sha256, raw_bytes, raw_content_type, arrays_sha256, arrays_bytes, request_id)
      select (m->>'acqId')::uuid, (m->>'labId')::uuid, (m->>'instrumentId')::uuid, m->>'runId', (m->>'acquiredAt')::timestamptz, m->>'sampleRef',
             'processed', m->>'bodyHash', coalesce(payload, (select u.body from ${uploads} u where u.id = (m->>'uploadId')::uuid)),
             (m->>'pointCount')::int, (m->>'submittedBy')::uuid, (m->>'at')::timestamptz,
             m->'ref'->>'rawSha256', (m->'ref'->>'rawBytes')::bigint, m->'ref'->>'rawContentType', m->'ref'->>'arraysSha256', (m->'ref'->>'arraysBytes')::bigint, m->>'requestId'
      from input
      returning 1 as n),
    run as (
      insert into ${acquisitionRuns} (lab_id, external_id, acquisition_id, acquisition_created_at)
      select (m->>'labId')::uuid, m->>'runId', (m->>'acqId')::uuid, (m->>'at')::timestamptz from input
      returning 1 as n),
    res as (
      insert into ${results} (id, acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, review_state, reviewed_at, released_at, created_at)
      select (m->>'resId')::uuid, (m->>'acqId')::uuid, (m->>'at')::timestamptz, (m->>'labId')::uuid, (m->>'geometryVersionId')::uuid, (m->>'calibrationId')::uuid,
             m->>'engineVersion', summary, (m->>'reviewState')::review_state, (m->>'releasedAt')::timestamptz, (m->>'releasedAt')::timestamptz, (m->>'at')::timestamptz
      from input
      returning 1 as n),
    pk as (
      insert into ${peaks} (result_id, acquisition_created_at, lab_id, mz, area, species, charge)
      select (i.m->>'resId')::uuid, (i.m->>'at')::timestamptz, (i.m->>'labId')::uuid, p.mz, p.area, p.species, p.charge
      from input i cross join lateral jsonb_to_recordset(i.peaks) as p(mz float8, area float8, species text, charge int)
      returning 1 as n),
    written as (
      select (select count(*) from acq) + (select count(*) from run) + (select count(*) from res) + (select count(*) from pk) as n),
    owed as (
      select * from input where m->>'reviewState' = 'released'),
    counts as (
      select (m->>'labId')::uuid as lab_id, count(*) as c from owed group by 1),
    locked as materialized (
      select l.id from ${labs} l where l.id in (select lab_id from counts) and (select n from written) > 0
      order by l.id for no key update),
    seq as (
      update ${labs} l set event_sequence = l.event_sequence + c.c from counts c
      where l.id = c.lab_id and l.id in (select id from locked)
      returning l.id as lab_id, l.event_sequence as last, c.c),
    ev as (
      insert into ${events} (lab_id, sequence, type, payload, created_at)
      select s.lab_id, s.last - s.c + row_number() over (partition by s.lab_id order by i.ord), ${RESULT_EVENT}, i.view, (i.m->>'at')::timestamptz
      from owed i join seq s on s.lab_id = (i.m->>'labId')::uuid
      returning id, lab_id)
    ${fanOut(RESULT_EVENT, sql`ev.lab_id`)}`
}
