import { and, asc, eq, gt, gte, inArray, lte, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { eventFeedQuery, peakQuery } from '#shared/schemas/partners'
import { alias } from 'drizzle-orm/pg-core'
import { CAUTION_SHORT } from '#shared/caution'
import { acquisitions, events, grants, labs, peaks, results, users } from '../../database/schema'
import { getAcquisition, previousPublished, resultChoice, reviewOf } from '../results'
import { grantedLabIds } from './grants'

// What a partner sees: only labs that granted it, among those only the event types they
// granted, and of each acquisition only its published result (the highest version its lab
// released, shown marked if since retracted). Held and rejected results reach no partner
// by any route: events are recorded only on release, and every read picks the published
// version.

const reviewer = alias(users, 'reviewer')

// The feed's cursor is the last sequence number seen per lab. A lab's sequence numbers are
// handed out under a lock on the lab's row and held until commit, so they commit in order
// and without gaps: a poller that resumes from its cursor never skips an event.
type FeedCursor = Record<string, number>
function encode(c: FeedCursor) {
  return Buffer.from(JSON.stringify(c)).toString('base64url')
}
function decode(cursor: string): FeedCursor {
  try {
    const c = JSON.parse(Buffer.from(cursor, 'base64url').toString()) as unknown
    if (c && typeof c === 'object' && !Array.isArray(c) && Object.values(c).every(v => Number.isInteger(v))) return c as FeedCursor
  }
  catch { /* fall through */ }
  throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
}

/** The pull feed: the events of granted labs of the granted types, oldest first, from after `cursor`. */
export async function eventFeed(partnerId: string, query: z.output<typeof eventFeedQuery>) {
  const labIds = await grantedLabIds(partnerId)
  if (!labIds.length) return { items: [], nextCursor: query.cursor ?? encode({}) }
  const conditions: (SQL | undefined)[] = [inArray(events.labId, labIds),
    // `result.created` was the name of `result.released` before review existed (migration 0014 renamed the grants).
    sql`exists (select 1 from ${grants} g where g.partner_id = ${partnerId} and g.lab_id = ${events.labId}
      and (${events.type} = any(g.event_types) or (${events.type} = 'result.created' and 'result.released' = any(g.event_types))))`]
  if (query.lab) conditions.push(eq(labs.slug, query.lab))
  const seen = query.cursor ? decode(query.cursor) : {}
  conditions.push(sql`${events.sequence} > coalesce((${JSON.stringify(seen)}::jsonb ->> ${events.labId}::text)::bigint, 0)`)
  const rows = await useDb().select({ id: events.id, labId: events.labId, type: events.type, sequence: events.sequence, lab: labs.slug, createdAt: events.createdAt, payload: events.payload })
    .from(events).innerJoin(labs, eq(labs.id, events.labId)).where(and(...conditions))
    .orderBy(asc(events.createdAt), asc(events.labId), asc(events.sequence)).limit(query.limit)
  const next = { ...seen }
  for (const r of rows) next[r.labId] = Math.max(next[r.labId] ?? 0, Number(r.sequence))
  return {
    items: rows.map(r => ({ id: r.id, type: r.type, lab: r.lab, sequence: Number(r.sequence), createdAt: r.createdAt.toISOString(), data: r.payload })),
    // The cursor points after the last item seen, so a poller keeps it and asks again.
    nextCursor: encode(next),
  }
}

/** One acquisition's published result, if its lab granted this partner; one not released yet is 404 like a missing one. */
export async function partnerResult(partnerId: string, acquisitionId: string) {
  const labIds = await grantedLabIds(partnerId)
  const [row] = labIds.length
    ? await useDb().select({ labId: acquisitions.labId }).from(acquisitions).where(and(eq(acquisitions.id, acquisitionId), inArray(acquisitions.labId, labIds)))
    : []
  if (!row) throw problem(404, 'result-not-found', 'No such result among the labs that granted you access.')
  try { return await getAcquisition(row.labId, acquisitionId, 'published') }
  catch { throw problem(404, 'result-not-found', 'No such result among the labs that granted you access.') }
}

/**
 * Peaks in an m/z window across granted labs (uses the index on peaks.mz), of published
 * results only, each with its uncertainties (from the result's peak of the same centroid),
 * the result's review block, calibration state, versions and the caution.
 */
export async function peaksInWindow(partnerId: string, query: z.output<typeof peakQuery>) {
  const labIds = await grantedLabIds(partnerId)
  if (!labIds.length) return { items: [], nextCursor: null }
  const rows = await useDb().select({
    id: peaks.id, mz: peaks.mz, area: peaks.area, species: peaks.species, charge: peaks.charge,
    // The peaks row was written from the same JSON number as the summary's centroid, so they compare equal.
    fitted: sql<{ mzU: number | null, areaU: number | null } | null>`(select jsonb_build_object('mzU', e->'centroidU', 'areaU', e->'areaU')
      from jsonb_array_elements(${results.summary}->'peaks') e where (e->>'centroid')::float8 = ${peaks.mz} limit 1)`,
    lab: labs.slug, acquisitionId: results.acquisitionId, acquiredAt: acquisitions.acquiredAt, res: results, reviewer: reviewer.name, previous: previousPublished(),
  }).from(peaks)
    .innerJoin(results, and(eq(results.id, peaks.resultId), resultChoice('published')))
    .innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
    .innerJoin(labs, eq(labs.id, peaks.labId))
    .leftJoin(reviewer, eq(reviewer.id, results.reviewedBy))
    .where(and(inArray(peaks.labId, labIds), gte(peaks.mz, query.mzMin), lte(peaks.mz, query.mzMax),
      query.species ? eq(peaks.species, query.species) : undefined, query.cursor ? gt(peaks.id, query.cursor) : undefined))
    .orderBy(asc(peaks.id)).limit(query.limit + 1)
  const items = rows.slice(0, query.limit)
  return {
    items: items.map(({ res, reviewer: name, fitted, previous, ...r }) => {
      const summary = res.summary as { calibrated?: boolean, constants?: string, geometryVersion?: number, calibrationVersion?: number | null }
      return {
        ...r, acquiredAt: r.acquiredAt.toISOString(), mzU: fitted?.mzU ?? null, areaU: fitted?.areaU ?? null, resultId: res.id,
        calibrated: summary.calibrated ?? false,
        versions: { engine: res.engineVersion, constants: summary.constants ?? '', geometry: summary.geometryVersion ?? 0, calibration: summary.calibrationVersion ?? null, method: null },
        review: reviewOf(res, name, previous), caution: CAUTION_SHORT,
      }
    }),
    nextCursor: rows.length > query.limit ? String(items.at(-1)!.id) : null,
  }
}
