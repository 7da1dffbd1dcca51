import { randomUUID } from 'node:crypto'
import { hostname } from 'node:os'
import { sql } from 'drizzle-orm'
import { isError } from 'h3'
import { EngineError, type EngineResult } from '#shared/engine'
import type { AcquisitionInput } from '#shared/schemas/acquisitions'
import { acquisitions, instruments, peaks, reprocessItems, reprocessJobs, results } from '../../database/schema'
import { computeResult } from '../ingest'
import { instrumentContextAt } from '../instruments'
import { payloadOf } from '../store'
import { figuresChanged } from './compare'

// The reprocessing worker of this process. A job is taken under a lease (FOR UPDATE SKIP
// LOCKED on the job row, as deliveries are claimed); its pending items are processed a small
// batch at a time, each batch in ONE transaction that re-checks the lease under the job
// row's lock, writes the new versions (held for review) with their peaks, marks the items
// done and advances the job's counts. A worker killed mid-batch commits nothing of it; its
// lease runs out and another worker (or the same one restarted) takes the job from the first
// pending item, so every item is done exactly once.

/** This process's name on the job leases it holds. */
const workerId = `${hostname()}:${process.pid}:${randomUUID().slice(0, 8)}`

const WORKER_ACTOR = { id: null, label: 'reprocessing worker' }

// At most this many points per batch (besides its first item): about 20 MB of payload JSON
// (ingest/uploads.ts: 10^6 points) and its parsed arrays, whatever the batch size (common practice, no source).
const MAX_BATCH_POINTS = 1_000_000

let settings: ReturnType<typeof readSettings> | undefined
function readSettings() {
  const r = useRuntimeConfig().reprocess
  return {
    batchSize: Math.max(1, Number(r.batchSize)),
    pauseMs: Math.max(0, Number(r.pauseMs)),
    leaseSeconds: Math.max(5, Number(r.leaseSeconds)),
    pollMs: Math.max(100, Number(r.pollMs)),
  }
}
const reprocessSettings = () => (settings ??= readSettings())

let timer: NodeJS.Timeout | undefined
let running: Promise<void> | undefined
let stopped = true

/** Starts this process's worker: it looks for jobs every `pollMs` and when one is created here. */
export function startReprocessWorker() {
  stopped = false
  timer = setInterval(kickReprocessing, reprocessSettings().pollMs)
  timer.unref()
  kickReprocessing()
}

/** Wakes the worker now (after a job was created) rather than at its next poll. */
export function kickReprocessing() {
  if (stopped) return
  running ??= runJobs().catch(error => logError('[reprocess] worker failed; the next poll tries again', error)).finally(() => { running = undefined })
}

/** Stops after the batch in hand (committed or not), and hands back the job's lease. */
export async function stopReprocessWorker() {
  stopped = true
  clearInterval(timer)
  await running
  await useDb().update(reprocessJobs).set({ leaseOwner: null, leaseUntil: null })
    .where(sql`${reprocessJobs.leaseOwner} = ${workerId} and ${reprocessJobs.state} = 'running'`)
}

async function runJobs() {
  while (!stopped) {
    const jobId = await claimJob()
    if (!jobId) return
    await runJob(jobId)
  }
}

/** A queued job, or a running one whose worker's lease ran out (or was handed back), oldest first. */
async function claimJob(): Promise<string | undefined> {
  const [row] = await useDb().execute<{ id: string }>(sql`
    update ${reprocessJobs} set state = 'running', lease_owner = ${workerId},
      lease_until = now() + make_interval(secs => ${reprocessSettings().leaseSeconds}), started_at = coalesce(started_at, now())
    where id = (select id from ${reprocessJobs}
                where state = 'queued' or (state = 'running' and (lease_until is null or lease_until < now()))
                order by created_at limit 1 for update skip locked)
    returning id`)
  return row?.id
}

async function runJob(jobId: string) {
  while (!stopped) {
    const outcome = await processBatch(jobId)
    if (outcome !== 'more') return
    const { pauseMs } = reprocessSettings()
    if (pauseMs) await new Promise(resolve => setTimeout(resolve, pauseMs))
  }
}

type PendingItem = {
  acquisition_id: string, run_id: string, acquired_ms: string, payload: AcquisitionInput | null, arrays_sha256: string | null, raw_removed_at: string | null, slug: string, lab_id: string,
  res_id: string, res_version: number, summary: EngineResult
}

interface ItemOutcome {
  acqId: string, state: 'done' | 'failed', changed: boolean | null, error: string | null, oldId: string, oldVersion: number,
  newId: string | null, geometryVersionId?: string, calibrationId?: string | null, engineVersion?: string, summary?: unknown,
  peaks?: { mz: number, area: number, species: string | null, charge: number | null }[]
}

/**
 * One batch of a job, in one transaction: 'more' when items were done, 'finished' when none
 * was pending (the job is then marked done), 'lost' when the job is no longer this worker's
 * (cancelled, or its lease taken over after running out).
 */
export async function processBatch(jobId: string): Promise<'more' | 'finished' | 'lost'> {
  const { batchSize, leaseSeconds } = reprocessSettings()
  return useDb().transaction(async (tx) => {
    const [job] = await tx.execute<{ id: string, lab_id: string, reason: string, total: number, processed: number, changed: number, failed: number }>(sql`
      select id, lab_id, reason, total, processed, changed, failed from ${reprocessJobs}
      where id = ${jobId}::uuid and lease_owner = ${workerId} and state = 'running' for update`)
    if (!job) return 'lost'
    // The newest version of each pending item's result as it stands now: the one the new version supersedes.
    // A batch is also bounded by points, so that large uploads (up to 10^6 points, tens of MB of
    // payload each) are taken one or a few at a time; the first pending item always goes.
    const items = await tx.execute<PendingItem>(sql`
      with head as (
        select acquisition_id, acquisition_created_at, ord from ${reprocessItems}
        where job_id = ${jobId}::uuid and state = 'pending' order by ord limit ${batchSize}),
      next as (
        select h.acquisition_id, h.acquisition_created_at, h.ord, sum(a.point_count) over (order by h.ord) as points_so_far
        from head h join ${acquisitions} a on a.id = h.acquisition_id and a.created_at = h.acquisition_created_at)
      select n.acquisition_id, a.external_id as run_id, (extract(epoch from a.acquired_at) * 1000)::text as acquired_ms, a.payload, a.arrays_sha256, a.raw_removed_at::text, ins.slug, a.lab_id,
             r.id as res_id, r.version as res_version, r.summary
      from next n
      join ${acquisitions} a on a.id = n.acquisition_id and a.created_at = n.acquisition_created_at
      join ${instruments} ins on ins.id = a.instrument_id
      join lateral (select id, version, summary from ${results} where acquisition_id = a.id and acquisition_created_at = a.created_at order by version desc limit 1) r on true
      where n.points_so_far <= ${MAX_BATCH_POINTS} or n.ord = (select min(ord) from next)
      order by n.ord`)
    if (!items.length) {
      await tx.update(reprocessJobs).set({ state: 'done', finishedAt: new Date(), leaseOwner: null, leaseUntil: null }).where(sql`${reprocessJobs.id} = ${jobId}::uuid`)
      await recordAudit(tx, {
        actor: WORKER_ACTOR, action: 'reprocess.job-finished', targetType: 'reprocess_job', targetId: jobId,
        detail: { labId: job.lab_id, total: job.total, processed: job.processed, changed: job.changed, failed: job.failed },
      })
      return 'finished'
    }
    const outcomes = await Promise.all([...items].map(item => reprocessOne(item)))
    const changed = outcomes.filter(o => o.changed).length
    const failed = outcomes.filter(o => o.state === 'failed').length
    await tx.execute(batchStatement(jobId, job.reason, outcomes, changed, failed, leaseSeconds))
    return 'more'
  })
}

/** The item's acquisition through the engine under the geometry and calibration in force at its time, as registered now. */
async function reprocessOne(item: PendingItem): Promise<ItemOutcome> {
  const base = { acqId: item.acquisition_id, oldId: item.res_id, oldVersion: Number(item.res_version) }
  try {
    const context = await instrumentContextAt(item.lab_id, item.slug, new Date(Number(item.acquired_ms)), item.run_id)
    const geometry = context?.geometry
    if (!geometry) return { ...base, state: 'failed', changed: null, error: 'acquiredAt: is before the first geometry registered for this instrument', newId: null }
    // The raw data from the object store (or the JSON column of older rows); removed under the lab's retention, the item fails saying so.
    const input = await payloadOf<AcquisitionInput>({ payload: item.payload, arraysSha256: item.arrays_sha256, rawRemovedAt: item.raw_removed_at ? new Date(item.raw_removed_at) : null })
    const { engine, summary, applied } = computeResult(input, geometry, context.calibration, context.measuredSpecies)
    if (!figuresChanged(item.summary, engine)) return { ...base, state: 'done', changed: false, error: null, newId: null }
    return {
      ...base, state: 'done', changed: true, error: null, newId: randomUUID(),
      geometryVersionId: geometry.id, calibrationId: applied?.id ?? null, engineVersion: engine.engineVersion, summary,
      peaks: engine.peaks.map(p => ({ mz: p.centroid, area: p.area, species: p.assignment?.species ?? null, charge: p.assignment?.z ?? null })),
    }
  }
  catch (error) {
    // Only the engine's refusal of this acquisition (a problem document naming the field, or
    // an EngineError) fails the item for good. Anything else (the database, a fault of our own)
    // propagates: the batch's transaction rolls back and the job is taken again under its lease.
    if (error instanceof EngineError) return { ...base, state: 'failed', changed: null, error: error.message, newId: null }
    const problem = isError(error) ? (error.data as { problem?: { detail?: string, status?: number } } | undefined)?.problem : undefined
    // The store not answering (503) is no verdict on the acquisition: the batch is taken again.
    if (!problem || (problem.status ?? 0) >= 500) throw error
    return { ...base, state: 'failed', changed: null, error: problem.detail ?? 'the engine refused this acquisition', newId: null }
  }
}

/**
 * The batch's writes as one statement: new versions (version n+1, superseding n, held for
 * review, citing the job and its reason), n's supersededBy, the new peaks, the items marked
 * done or failed, and the job's counts with its lease extended.
 */
function batchStatement(jobId: string, reason: string, outcomes: ItemOutcome[], changed: number, failed: number, leaseSeconds: number) {
  return sql`
    with input as (
      -- Each outcome with its acquisition's created_at, copied from its item: the partition key
      -- of the new version and its peaks (a version lives in its acquisition's month).
      select t.r, it.acquisition_created_at as at from jsonb_array_elements(${JSON.stringify(outcomes)}::jsonb) as t(r)
      join ${reprocessItems} it on it.job_id = ${jobId}::uuid and it.acquisition_id = (t.r->>'acqId')::uuid),
    fresh as (
      insert into ${results} (id, acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, version, supersedes, correction_reason, reprocess_job_id, review_state)
      select (r->>'newId')::uuid, (r->>'acqId')::uuid, at, j.lab_id, (r->>'geometryVersionId')::uuid, (r->>'calibrationId')::uuid, r->>'engineVersion', r->'summary',
             (r->>'oldVersion')::int + 1, (r->>'oldId')::uuid, ${reason}, ${jobId}::uuid, 'held'
      from input, ${reprocessJobs} j where j.id = ${jobId}::uuid and r->>'newId' is not null
      returning id),
    superseded as (
      update ${results} o set superseded_by = (i.r->>'newId')::uuid
      from input i where o.id = (i.r->>'oldId')::uuid and o.acquisition_created_at = i.at and i.r->>'newId' is not null
      returning o.id),
    pk as (
      insert into ${peaks} (result_id, acquisition_created_at, lab_id, mz, area, species, charge)
      select (i.r->>'newId')::uuid, i.at, j.lab_id, p.mz, p.area, p.species, p.charge
      from input i cross join ${reprocessJobs} j
      cross join lateral jsonb_to_recordset(i.r->'peaks') as p(mz float8, area float8, species text, charge int)
      where j.id = ${jobId}::uuid and i.r->>'newId' is not null
      returning 1),
    marked as (
      update ${reprocessItems} it set state = (i.r->>'state')::reprocess_item_state, changed = (i.r->>'changed')::boolean, error = i.r->>'error',
        old_result_id = (i.r->>'oldId')::uuid, new_result_id = (i.r->>'newId')::uuid, done_at = now()
      from input i where it.job_id = ${jobId}::uuid and it.acquisition_id = (i.r->>'acqId')::uuid and it.state = 'pending'
      returning 1)
    update ${reprocessJobs} set processed = processed + (select count(*) from marked), changed = changed + ${changed}, failed = failed + ${failed},
      lease_until = now() + make_interval(secs => ${leaseSeconds})
    where id = ${jobId}::uuid and (select count(*) from fresh) >= 0 and (select count(*) from superseded) >= 0 and (select count(*) from pk) >= 0`
}
