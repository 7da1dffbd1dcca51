import { and, asc, eq, gt, gte, inArray, lte, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { eventFeedQuery, peakQuery } from '#shared/schemas/partners'
import { acquisitions, events, labs, peaks, results } from '../../database/schema'
import { getAcquisition } from '../results'
import { grantedLabIds } from './grants'

// What a partner sees: only labs that granted it, and among those only what they granted.

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

/** The pull feed: result events of granted labs, oldest first, from after `cursor`. */
export async function eventFeed(partnerId: string, query: z.output<typeof eventFeedQuery>) {
  const labIds = await grantedLabIds(partnerId)
  if (!labIds.length) return { items: [], nextCursor: query.cursor ?? encode({}) }
  const conditions: (SQL | undefined)[] = [inArray(events.labId, labIds)]
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

/** One acquisition's result, if its lab granted this partner. */
export async function partnerResult(partnerId: string, acquisitionId: string) {
  const labIds = await grantedLabIds(partnerId)
  const [row] = labIds.length
    ? await useDb().select({ labId: acquisitions.labId }).from(acquisitions).where(and(eq(acquisitions.id, acquisitionId), inArray(acquisitions.labId, labIds)))
    : []
  if (!row) throw problem(404, 'result-not-found', 'No such result among the labs that granted you access.')
  return getAcquisition(row.labId, acquisitionId)
}

/** Peaks in an m/z window across granted labs (uses the index on peaks.mz). */
export async function peaksInWindow(partnerId: string, query: z.output<typeof peakQuery>) {
  const labIds = await grantedLabIds(partnerId)
  if (!labIds.length) return { items: [], nextCursor: null }
  const rows = await useDb().select({
    id: peaks.id, mz: peaks.mz, area: peaks.area, species: peaks.species, charge: peaks.charge,
    lab: labs.slug, acquisitionId: results.acquisitionId, acquiredAt: acquisitions.acquiredAt,
  }).from(peaks)
    .innerJoin(results, eq(results.id, peaks.resultId))
    .innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
    .innerJoin(labs, eq(labs.id, peaks.labId))
    .where(and(inArray(peaks.labId, labIds), gte(peaks.mz, query.mzMin), lte(peaks.mz, query.mzMax),
      query.species ? eq(peaks.species, query.species) : undefined, query.cursor ? gt(peaks.id, query.cursor) : undefined))
    .orderBy(asc(peaks.id)).limit(query.limit + 1)
  const items = rows.slice(0, query.limit)
  return {
    items: items.map(r => ({ ...r, acquiredAt: r.acquiredAt.toISOString() })),
    nextCursor: rows.length > query.limit ? String(items.at(-1)!.id) : null,
  }
}
