import { and, desc, eq, gte, lte, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { acquisitionListQuery } from '#shared/schemas/acquisitions'
import type { ReviewState } from '#shared/schemas/lifecycle'
import { alias } from 'drizzle-orm/pg-core'
import { acquisitions, geometryVersions, instruments, labs, results, users } from '../../database/schema'
import { getObjectBytes, getObjectStream, isStoreUnavailable, payloadOf, rawDataRemoved } from '../store'
import { acquisitionHead, resultView } from './view'

const reviewer = alias(users, 'reviewer')

/**
 * Which of an acquisition's result versions to show. `latest`: the lab's own view (console,
 * lab key), whatever its review state. `published`: what partners see, the highest version
 * that was released (or released and then retracted, shown marked); held and rejected
 * versions never reach them.
 */
export type ResultChoice = 'latest' | 'published'
export function resultChoice(choice: ResultChoice): SQL {
  return choice === 'latest'
    ? sql`${results.version} = (select max(r2.version) from ${results} r2 where r2.acquisition_id = ${results.acquisitionId} and r2.acquisition_created_at = ${results.acquisitionCreatedAt})`
    : sql`${results.reviewState} in ('released', 'retracted') and ${results.version} = (select max(r2.version) from ${results} r2
        where r2.acquisition_id = ${results.acquisitionId} and r2.acquisition_created_at = ${results.acquisitionCreatedAt} and r2.review_state in ('released', 'retracted'))`
}

/**
 * The version partners were shown before this result (of the same acquisition): the highest
 * lower version released or retracted, the one `correction.previousResultId` names; null
 * when there is none.
 */
export const previousPublished = () => sql<string | null>`(select p.id from ${results} p where p.acquisition_id = ${results.acquisitionId} and p.acquisition_created_at = ${results.acquisitionCreatedAt}
  and p.version < ${results.version} and p.review_state in ('released', 'retracted') order by p.version desc limit 1)`

export async function listAcquisitions(labId: string, query: z.output<typeof acquisitionListQuery>) {
  const conditions: (SQL | undefined)[] = [eq(acquisitions.labId, labId)]
  if (query.instrument) conditions.push(eq(instruments.slug, query.instrument))
  if (query.status) conditions.push(eq(acquisitions.status, query.status))
  if (query.from) conditions.push(gte(acquisitions.acquiredAt, new Date(query.from)))
  if (query.to) conditions.push(lte(acquisitions.acquiredAt, new Date(query.to)))
  const sortColumn = query.sort === 'acquired' ? acquisitions.acquiredAt : acquisitions.createdAt
  if (query.cursor) conditions.push(afterCursor(query.cursor, sortColumn, acquisitions.id))
  const rows = await useDb().select({
    id: acquisitions.id, runId: acquisitions.externalId, instrument: instruments.slug, acquiredAt: acquisitions.acquiredAt,
    sampleRef: acquisitions.sampleRef, status: acquisitions.status, points: acquisitions.pointCount, createdAt: acquisitions.createdAt,
    reviewState: sql<ReviewState | null>`(select r.review_state from ${results} r where r.acquisition_id = ${acquisitions.id} and r.acquisition_created_at = ${acquisitions.createdAt} order by r.version desc limit 1)`,
    at: sql<string>`${sortColumn}::text`,
  }).from(acquisitions).innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .where(and(...conditions)).orderBy(desc(sortColumn), desc(acquisitions.id)).limit(query.limit + 1)
  const { items, nextCursor } = cursorPage(rows, query.limit)
  return {
    items: items.map(({ createdAt, at: _at, ...r }) => ({ ...r, acquiredAt: r.acquiredAt.toISOString(), receivedAt: createdAt.toISOString() })),
    nextCursor,
  }
}

/**
 * One acquisition of the lab with its latest result (or, for partners, its published one);
 * another lab's is 404 like a missing one, and so is one with nothing published yet.
 */
export async function getAcquisition(labId: string, id: string, choice: ResultChoice = 'latest') {
  const row = await acquisitionRow(labId, id, choice)
  // The lab sees its lineage as it is; partners the version they were shown before.
  return resultView(row.acq, row.res, row.slug, row.reviewer, choice === 'published' ? row.previous : undefined)
}

/**
 * The lab's own answer for one acquisition: its view and the id of the request that posted
 * it (null before the hub kept it), to find that request and its deliveries in the logs.
 * Partners never see it.
 */
export async function getLabAcquisition(labId: string, id: string) {
  const row = await acquisitionRow(labId, id, 'latest')
  return { ...resultView(row.acq, row.res, row.slug, row.reviewer), requestId: row.acq.requestId }
}

async function acquisitionRow(labId: string, id: string, choice: ResultChoice) {
  const [row] = await useDb().select({ acq: acquisitionHead, res: results, slug: instruments.slug, reviewer: reviewer.name, previous: previousPublished() }).from(acquisitions)
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt), resultChoice(choice)))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .leftJoin(reviewer, eq(reviewer.id, results.reviewedBy))
    .where(and(eq(acquisitions.id, id), eq(acquisitions.labId, labId))).limit(1)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  return row
}

const PAYLOAD_PREVIEW_CHARS = 6000

/**
 * What the console shows of one acquisition: the API's view, where it came from (instrument,
 * geometry kind) and the first characters of the raw payload: the body as the lab sent it,
 * read from the object store by range (rows from before the store: the stored JSON, cut by
 * PostgreSQL). The payload itself can be tens of megabytes, so only its start is fetched.
 * `rawData` says where the raw data is kept, or that the lab's retention removed it.
 */
export async function acquisitionDetail(labId: string, id: string) {
  const [row] = await useDb().select({
    acq: acquisitionHead, res: results, slug: instruments.slug, instrumentName: instruments.name, geometryKind: geometryVersions.kind, reviewer: reviewer.name,
    submittedBy: acquisitions.submittedBy, retentionDays: labs.rawRetentionDays,
    head: sql<string | null>`left(jsonb_pretty(${acquisitions.payload}), ${PAYLOAD_PREVIEW_CHARS})`, chars: sql<number | null>`length(${acquisitions.payload}::text)`,
  }).from(acquisitions)
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt), resultChoice('latest')))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .innerJoin(geometryVersions, eq(geometryVersions.id, results.geometryVersionId))
    .innerJoin(labs, eq(labs.id, acquisitions.labId))
    .leftJoin(reviewer, eq(reviewer.id, results.reviewedBy))
    // The console shows the newest version; its versions and their diff are the reprocessing capability's.
    .where(and(eq(acquisitions.id, id), eq(acquisitions.labId, labId))).limit(1)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  const { acq } = row
  let payload: { head: string, chars: number, truncated: boolean, unavailable: boolean }
  if (acq.rawRemovedAt) payload = { head: '', chars: 0, truncated: false, unavailable: false }
  else if (acq.rawSha256) {
    // The store not answering must not take the page down: its results are in PostgreSQL, and
    // the preview says that the raw data is unavailable for now.
    try {
      const head = (await getObjectBytes('raw', acq.rawSha256, `bytes=0-${PAYLOAD_PREVIEW_CHARS - 1}`)).toString('utf8')
      payload = { head, chars: acq.rawBytes ?? 0, truncated: (acq.rawBytes ?? 0) > PAYLOAD_PREVIEW_CHARS, unavailable: false }
    }
    catch (error) {
      if (!isStoreUnavailable(error)) throw error
      payload = { head: '', chars: acq.rawBytes ?? 0, truncated: false, unavailable: true }
    }
  }
  else payload = { head: row.head ?? '', chars: Number(row.chars ?? 0), truncated: (row.head ?? '').length >= PAYLOAD_PREVIEW_CHARS, unavailable: false }
  return {
    ...resultView(acq, row.res, row.slug, row.reviewer),
    // For the console's review actions: the comment the reviewer left, and who uploaded it (four eyes).
    reviewComment: row.res.reviewComment, submittedBy: row.submittedBy,
    // The request that posted it, for an operator searching the logs (null before it was kept).
    requestId: acq.requestId,
    instrumentId: acq.instrumentId, instrumentName: row.instrumentName, geometryKind: row.geometryKind,
    payload,
    rawData: {
      kept: acq.rawRemovedAt ? 'removed' as const : acq.rawSha256 ? 'object-store' as const : 'database' as const,
      removedAt: acq.rawRemovedAt?.toISOString() ?? null, retentionDays: row.retentionDays,
      sha256: acq.rawSha256, bytes: acq.rawBytes, contentType: acq.rawContentType,
    },
  }
}

/** The acquisition's parsed payload as JSON text, for download (from the store, or the row). */
export async function acquisitionPayload(labId: string, id: string) {
  const [row] = await useDb().execute<{ run_id: string, payload: string | null, arrays_sha256: string | null, raw_removed_at: Date | null }>(sql`
    select external_id as run_id, payload::text as payload, arrays_sha256, raw_removed_at from ${acquisitions} where id = ${id}::uuid and lab_id = ${labId}::uuid`)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  if (row.payload !== null && !row.raw_removed_at) return { runId: row.run_id, json: row.payload }
  const body = await payloadOf({ arraysSha256: row.arrays_sha256, rawRemovedAt: row.raw_removed_at ? new Date(row.raw_removed_at) : null })
  return { runId: row.run_id, json: JSON.stringify(body) }
}

/** The body exactly as the lab sent it, streamed from the object store, with its Content-Type. */
export async function acquisitionReceivedBody(labId: string, id: string) {
  const [row] = await useDb().select({ runId: acquisitions.externalId, sha: acquisitions.rawSha256, type: acquisitions.rawContentType, bytes: acquisitions.rawBytes, removed: acquisitions.rawRemovedAt })
    .from(acquisitions).where(and(eq(acquisitions.id, id), eq(acquisitions.labId, labId))).limit(1)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  if (row.removed) throw rawDataRemoved(row.removed)
  if (!row.sha) throw problem(404, 'raw-body-not-kept', 'This acquisition arrived before the object store: only its parsed payload is kept (payload.json).')
  return { runId: row.runId, contentType: row.type ?? 'application/octet-stream', bytes: row.bytes ?? 0, sha256: row.sha, stream: await getObjectStream('raw', row.sha) }
}
