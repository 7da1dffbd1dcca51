import { and, asc, desc, eq, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import { CAUTION } from '#shared/caution'
import type { SequenceView, sequenceListQuery } from '#shared/schemas/sequences'
import { acquisitions, controlPoints, instruments, methods, sequenceItems, sequences, users } from '../../database/schema'

// What the API and the console answer for sequences.

type SequenceRow = typeof sequences.$inferSelect

/** The lab's sequence with this id of the lab's, or undefined. */
export async function findSequence(labId: string, externalId: string): Promise<SequenceRow | undefined> {
  return useDb().query.sequences.findFirst({ where: and(eq(sequences.labId, labId), eq(sequences.externalId, externalId)) })
}

/** One sequence with its acquisitions, method, outcome and control-chart violations. */
export async function sequenceViewOf(row: SequenceRow): Promise<SequenceView> {
  const [members, method, instrument, violated, reviewer] = await Promise.all([
    useDb().select({ position: sequenceItems.position, role: sequenceItems.role, material: sequenceItems.material, acquisitionId: sequenceItems.acquisitionId, runId: acquisitions.externalId, acquiredAt: acquisitions.acquiredAt })
      .from(sequenceItems).innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
      .where(eq(sequenceItems.sequenceId, row.id)).orderBy(asc(sequenceItems.position)),
    row.methodId ? useDb().query.methods.findFirst({ where: eq(methods.id, row.methodId), columns: { id: true, version: true, name: true } }) : undefined,
    useDb().query.instruments.findFirst({ where: eq(instruments.id, row.instrumentId), columns: { slug: true } }),
    useDb().select({ material: controlPoints.material, quantity: controlPoints.quantity, position: controlPoints.position, rules: controlPoints.violations })
      .from(controlPoints).where(and(eq(controlPoints.sequenceId, row.id), sql`cardinality(${controlPoints.violations}) > 0`)).orderBy(asc(controlPoints.position)),
    row.reviewedBy ? useDb().query.users.findFirst({ where: eq(users.id, row.reviewedBy), columns: { name: true } }) : undefined,
  ])
  return {
    id: row.id, sequenceId: row.externalId, instrument: instrument?.slug ?? '', status: row.status, declaredLength: row.declaredLength,
    received: members.length, method: method ?? null, flagged: row.flagged, violations: violated, failure: row.failure ?? null,
    acquisitions: members.map(m => ({ ...m, acquiredAt: m.acquiredAt.toISOString() })),
    outcome: row.outcome ?? null,
    createdAt: row.createdAt.toISOString(), closedAt: row.closedAt?.toISOString() ?? null, processedAt: row.processedAt?.toISOString() ?? null,
    review: {
      state: row.reviewState, releasedAt: row.releasedAt?.toISOString() ?? null, reviewedBy: reviewer?.name ?? null, comment: row.reviewComment,
      retractionReason: row.retractionReason, retractedAt: row.retractedAt?.toISOString() ?? null,
    },
    caution: CAUTION,
  }
}

/** One of the lab's sequences by the lab's id for it; another lab's is 404 like a missing one. */
export async function getSequence(labId: string, externalId: string): Promise<SequenceView> {
  const row = await findSequence(labId, externalId)
  if (!row) throw problem(404, 'sequence-not-found', 'No sequence with this id in your lab.')
  return sequenceViewOf(row)
}

/** The lab's sequence by Arcwise's id (the console's links). */
export async function getSequenceById(labId: string, id: string): Promise<SequenceView> {
  const row = await useDb().query.sequences.findFirst({ where: and(eq(sequences.labId, labId), eq(sequences.id, id)) })
  if (!row) throw problem(404, 'sequence-not-found', 'No such sequence in this lab.')
  return sequenceViewOf(row)
}

function encodeCursor(row: { at: string, id: string }) {
  return Buffer.from(`${row.at}|${row.id}`).toString('base64url')
}
function decodeCursor(cursor: string): { at: string, id: string } {
  const [at, id] = Buffer.from(cursor, 'base64url').toString().split('|')
  if (!id || !at || Number.isNaN(Date.parse(at)) || !/^[0-9a-f-]{36}$/.test(id)) throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
  return { at, id }
}

/** The lab's sequences, newest first, in cursor pages, each with its outcome in brief. */
export async function listSequences(labId: string, query: z.output<typeof sequenceListQuery>) {
  const conditions: (SQL | undefined)[] = [eq(sequences.labId, labId)]
  if (query.instrument) conditions.push(eq(instruments.slug, query.instrument))
  if (query.status) conditions.push(eq(sequences.status, query.status))
  if (query.flagged !== undefined) conditions.push(eq(sequences.flagged, query.flagged))
  if (query.cursor) {
    const c = decodeCursor(query.cursor)
    conditions.push(sql`(${sequences.createdAt}, ${sequences.id}) < (${c.at}::timestamptz, ${c.id}::uuid)`)
  }
  const rows = await useDb().select({
    id: sequences.id, sequenceId: sequences.externalId, instrument: instruments.slug, status: sequences.status, declaredLength: sequences.declaredLength,
    received: sql<number>`(select count(*)::int from ${sequenceItems} si where si.sequence_id = ${sequences.id})`,
    methodVersion: methods.version, flagged: sequences.flagged,
    accepted: sql<boolean | null>`(${sequences.outcome}->>'accepted')::boolean`,
    failure: sql<string | null>`${sequences.failure}->>'message'`,
    createdAt: sequences.createdAt, processedAt: sequences.processedAt, reviewState: sequences.reviewState, at: sql<string>`${sequences.createdAt}::text`,
  }).from(sequences).innerJoin(instruments, eq(instruments.id, sequences.instrumentId)).leftJoin(methods, eq(methods.id, sequences.methodId))
    .where(and(...conditions)).orderBy(desc(sequences.createdAt), desc(sequences.id)).limit(query.limit + 1)
  const items = rows.slice(0, query.limit)
  return {
    items: items.map(({ at: _at, ...r }) => ({ ...r, createdAt: r.createdAt.toISOString(), processedAt: r.processedAt?.toISOString() ?? null })),
    nextCursor: rows.length > query.limit ? encodeCursor(items.at(-1)!) : null,
  }
}
