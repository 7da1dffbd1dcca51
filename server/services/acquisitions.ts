import { and, desc, eq, gte, lte, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { acquisitionListQuery } from '#shared/schemas/acquisitions'
import { acquisitions, instruments, results } from '../database/schema'

// Cursor pages in a stable order: newest received first, ties broken by id. The cursor
// keeps PostgreSQL's microsecond timestamp as text: a JavaScript Date would round it to
// the millisecond and skip rows received within the same millisecond.
function encodeCursor(row: { at: string, id: string }) {
  return Buffer.from(`${row.at}|${row.id}`).toString('base64url')
}
function decodeCursor(cursor: string): { at: string, id: string } {
  const [at, id] = Buffer.from(cursor, 'base64url').toString().split('|')
  if (!id || !at || Number.isNaN(Date.parse(at)) || !/^[0-9a-f-]{36}$/.test(id)) throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
  return { at, id }
}

export async function listAcquisitions(labId: string, query: z.output<typeof acquisitionListQuery>) {
  const conditions: (SQL | undefined)[] = [eq(acquisitions.labId, labId)]
  if (query.instrument) conditions.push(eq(instruments.slug, query.instrument))
  if (query.status) conditions.push(eq(acquisitions.status, query.status))
  if (query.from) conditions.push(gte(acquisitions.acquiredAt, new Date(query.from)))
  if (query.to) conditions.push(lte(acquisitions.acquiredAt, new Date(query.to)))
  if (query.cursor) {
    const c = decodeCursor(query.cursor)
    conditions.push(sql`(${acquisitions.createdAt}, ${acquisitions.id}) < (${c.at}::timestamptz, ${c.id}::uuid)`)
  }
  const rows = await useDb().select({
    id: acquisitions.id, runId: acquisitions.externalId, instrument: instruments.slug, acquiredAt: acquisitions.acquiredAt,
    sampleRef: acquisitions.sampleRef, status: acquisitions.status, points: acquisitions.pointCount, createdAt: acquisitions.createdAt,
    at: sql<string>`${acquisitions.createdAt}::text`,
  }).from(acquisitions).innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .where(and(...conditions)).orderBy(desc(acquisitions.createdAt), desc(acquisitions.id)).limit(query.limit + 1)
  const items = rows.slice(0, query.limit)
  return {
    items: items.map(({ createdAt, at: _at, ...r }) => ({ ...r, acquiredAt: r.acquiredAt.toISOString(), receivedAt: createdAt.toISOString() })),
    nextCursor: rows.length > query.limit ? encodeCursor(items.at(-1)!) : null,
  }
}

/** One acquisition of the lab with its current result; another lab's is 404 like a missing one. */
export async function getAcquisition(labId: string, id: string) {
  const [row] = await useDb().select({ acq: acquisitions, res: results, slug: instruments.slug }).from(acquisitions)
    .innerJoin(results, eq(results.acquisitionId, acquisitions.id))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .where(and(eq(acquisitions.id, id), eq(acquisitions.labId, labId))).limit(1)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  return resultView(row.acq, row.res, row.slug)
}
