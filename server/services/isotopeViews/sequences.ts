import { and, count, desc, eq, inArray, sql, type SQL } from 'drizzle-orm'
import type { OutcomeItem, SequenceOutcome } from '#shared/engine/isotopes/types'
import type { DriftView, NormalisationView, SequenceDetail, SequenceListItem, SequenceListPage, StandardComparison } from '#shared/schemas/isotopeViews'
import { acquisitions, controlPoints, instruments, methods, sequenceItems, sequences, users } from '../../database/schema'
import { sequenceMaterialsAt, type SequenceMaterialInfo } from './materials'

// The console's reading of sequences: the lab's list and one sequence laid out for review
// (standards against accepted values, the normalisation, the drift, the steps). The numbers
// are the engine's outcome as stored when the sequence was processed; nothing is recomputed.

function encodeCursor(at: string, id: string) {
  return Buffer.from(`${at}|${id}`).toString('base64url')
}
function decodeCursor(cursor: string) {
  const [at, id] = Buffer.from(cursor, 'base64url').toString().split('|')
  if (!id || !at || Number.isNaN(Date.parse(at)) || !/^[0-9a-f-]{36}$/.test(id)) throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
  return { at, id }
}

const standardRoles = new Set(['working-standard', 'monitoring-standard'])

type SequenceRow = typeof sequences.$inferSelect

function listItem(s: SequenceRow, inst: { id: string, slug: string, name: string }, method: { version: number } | null, stats: { items: number, samples: number, startedAt: Date | null }, violations: number): SequenceListItem {
  const outcome = s.outcome
  const flags = [...(outcome?.flags ?? [])]
  if (s.failure) flags.unshift({ code: s.failure.code, message: s.failure.message })
  return {
    id: s.id, externalId: s.externalId, instrument: inst, gas: outcome?.gas ?? null, status: s.status,
    methodVersion: method?.version ?? null, items: stats.items, samples: stats.samples,
    startedAt: stats.startedAt ? new Date(stats.startedAt).toISOString() : null, closedAt: s.closedAt?.toISOString() ?? null,
    accepted: outcome ? outcome.accepted : null, reviewState: s.reviewState, flags, violations,
  }
}

/** A lab's sequences, newest first, optionally of one instrument or status. */
export async function listSequenceViews(labId: string, query: { limit: number, cursor?: string, instrument?: string, status?: SequenceRow['status'] }): Promise<SequenceListPage> {
  const db = useDb()
  const conditions: (SQL | undefined)[] = [eq(sequences.labId, labId)]
  if (query.instrument) conditions.push(eq(sequences.instrumentId, query.instrument))
  if (query.status) conditions.push(eq(sequences.status, query.status))
  if (query.cursor) {
    const c = decodeCursor(query.cursor)
    conditions.push(sql`(${sequences.createdAt}, ${sequences.id}) < (${c.at}::timestamptz, ${c.id}::uuid)`)
  }
  const rows = await db.select({ s: sequences, inst: { id: instruments.id, slug: instruments.slug, name: instruments.name }, methodVersion: methods.version, at: sql<string>`${sequences.createdAt}::text` })
    .from(sequences).innerJoin(instruments, eq(instruments.id, sequences.instrumentId)).leftJoin(methods, eq(methods.id, sequences.methodId))
    .where(and(...conditions)).orderBy(desc(sequences.createdAt), desc(sequences.id)).limit(query.limit + 1)
  const page = rows.slice(0, query.limit)
  const ids = page.map(r => r.s.id)
  const stats = new Map<string, { items: number, samples: number, startedAt: Date | null }>()
  const violations = new Map<string, number>()
  if (ids.length) {
    const itemRows = await db.select({
      sequenceId: sequenceItems.sequenceId, items: count(),
      samples: sql<number>`count(*) filter (where ${sequenceItems.role} = 'sample')::int`,
      startedAt: sql<Date | null>`min(${acquisitions.acquiredAt})`,
    }).from(sequenceItems).innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
      .where(inArray(sequenceItems.sequenceId, ids)).groupBy(sequenceItems.sequenceId)
    for (const r of itemRows) stats.set(r.sequenceId, { items: r.items, samples: r.samples, startedAt: r.startedAt })
    const broken = await db.select({ sequenceId: controlPoints.sequenceId, n: count() }).from(controlPoints)
      .where(and(inArray(controlPoints.sequenceId, ids), sql`cardinality(${controlPoints.violations}) > 0`)).groupBy(controlPoints.sequenceId)
    for (const r of broken) if (r.sequenceId) violations.set(r.sequenceId, r.n)
  }
  return {
    items: page.map(r => listItem(r.s, r.inst, r.methodVersion === null ? null : { version: r.methodVersion }, stats.get(r.s.id) ?? { items: 0, samples: 0, startedAt: null }, violations.get(r.s.id) ?? 0)),
    nextCursor: rows.length > query.limit ? encodeCursor(page.at(-1)!.at, page.at(-1)!.s.id) : null,
  }
}

const meanOf = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length

/** One sequence of the lab laid out for review; another lab's is 404 like a missing one. */
export async function getSequenceView(labId: string, id: string): Promise<SequenceDetail> {
  const db = useDb()
  const [row] = await db.select({ s: sequences, inst: { id: instruments.id, slug: instruments.slug, name: instruments.name }, method: methods })
    .from(sequences).innerJoin(instruments, eq(instruments.id, sequences.instrumentId)).leftJoin(methods, eq(methods.id, sequences.methodId))
    .where(and(eq(sequences.id, id), eq(sequences.labId, labId))).limit(1)
  if (!row) throw problem(404, 'sequence-not-found', 'No such sequence in this lab.')
  const items = await db.select({ position: sequenceItems.position, role: sequenceItems.role, material: sequenceItems.material, acquisitionId: sequenceItems.acquisitionId, acquiredAt: acquisitions.acquiredAt })
    .from(sequenceItems).innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
    .where(eq(sequenceItems.sequenceId, id)).orderBy(sequenceItems.position)
  const points = await db.select().from(controlPoints).where(eq(controlPoints.sequenceId, id))
  const startedAt = items.length ? new Date(Math.min(...items.map(i => i.acquiredAt.getTime()))) : row.s.createdAt
  const codes = [...new Set(items.map(i => i.material).filter((m): m is string => !!m))]
  const materials = await sequenceMaterialsAt(labId, codes, startedAt)
  const outcome = row.s.outcome
  const byPosition = new Map((outcome?.items ?? []).map(o => [o.position, o]))
  const violationList = points.flatMap(p => p.violations.map(rule => ({ rule, material: p.material, quantity: p.quantity, message: `${materials.get(p.material)?.name ?? p.material} ${p.quantity} at position ${p.position ?? '?'}: ${p.value.toFixed(3)} against ${p.accepted.toFixed(3)}` })))
  const base = listItem(row.s, row.inst, row.method, { items: items.length, samples: items.filter(i => i.role === 'sample').length, startedAt: items.length ? startedAt : null }, violationList.length)
  const rows = items.map((i) => {
    const o = byPosition.get(i.position)
    return {
      position: i.position, role: i.role, material: i.material, materialName: i.material ? materials.get(i.material)?.name ?? null : null,
      acquiredAt: i.acquiredAt.toISOString(), acquisitionId: i.acquisitionId,
      raw: o?.raw ?? {}, final: o?.final ?? {}, residual: o?.residual ?? {}, flags: o?.flags ?? [],
    }
  })
  const reviewer = row.s.reviewedBy ? await db.query.users.findFirst({ where: eq(users.id, row.s.reviewedBy), columns: { name: true } }) : undefined
  return {
    ...base,
    labId,
    review: {
      state: row.s.reviewState, releasedAt: row.s.releasedAt?.toISOString() ?? null, reviewedBy: reviewer?.name ?? null, comment: row.s.reviewComment,
      retractionReason: row.s.retractionReason, retractedAt: row.s.retractedAt?.toISOString() ?? null,
    },
    method: row.method ? { version: row.method.version, definition: row.method.definition } : null,
    quantities: outcome?.quantities ?? [],
    failure: row.s.failure ?? null,
    rows,
    standards: outcome ? standardsOf(outcome, materials) : [],
    normalisation: outcome ? normalisationOf(outcome, materials) : [],
    drift: outcome ? driftOf(outcome, rows) : [],
    steps: outcome?.steps ?? [],
    violationList,
  }
}

/**
 * Each standard of the sequence per quantity: its accepted value (the registry's, else the
 * final value less the engine's residual), the mean of its final values, and that mean's
 * residual. u of the mean: the items' u combined as independent, √Σu²/n (GUM 5.1.2).
 */
function standardsOf(outcome: SequenceOutcome, materials: Map<string, SequenceMaterialInfo>): StandardComparison[] {
  const anchors = new Set(outcome.normalisation.flatMap(n => n.anchors.map(a => a.material)))
  const groups = new Map<string, OutcomeItem[]>()
  for (const item of outcome.items) {
    if (!standardRoles.has(item.role) || !item.material) continue
    groups.set(item.material, [...(groups.get(item.material) ?? []), item])
  }
  const out: StandardComparison[] = []
  for (const [material, group] of groups) {
    const info = materials.get(material)
    for (const quantity of outcome.quantities) {
      const withValue = group.filter(g => g.final[quantity])
      const registered = info?.values[quantity]
      const fromResidual = withValue.find(g => g.residual?.[quantity] !== undefined)
      const accepted = registered ?? (fromResidual ? { value: fromResidual.final[quantity]!.value - fromResidual.residual![quantity]!, u: 0 } : null)
      if (!accepted) continue
      const measured = withValue.length
        ? { value: meanOf(withValue.map(g => g.final[quantity]!.value)), u: Math.sqrt(withValue.reduce((a, g) => a + g.final[quantity]!.u ** 2, 0)) / withValue.length }
        : null
      out.push({
        material, name: info?.name ?? material, quantity, accepted, source: info?.source ?? 'not in the registry',
        positions: group.map(g => g.position), measured, residual: measured ? measured.value - accepted.value : null, anchor: anchors.has(material),
      })
    }
  }
  return out
}

function normalisationOf(outcome: SequenceOutcome, materials: Map<string, SequenceMaterialInfo>): NormalisationView[] {
  return outcome.normalisation.map(n => ({
    ...n,
    anchors: n.anchors.map(a => ({ ...a, name: materials.get(a.material)?.name ?? a.material })),
    anchoredSamples: outcome.items.filter(i => i.role === 'sample' && i.final[n.quantity] && i.raw[n.quantity])
      .map(i => ({ position: i.position, raw: i.raw[n.quantity]!, final: i.final[n.quantity]! })),
  }))
}

function driftOf(outcome: SequenceOutcome, rows: { position: number, material: string | null, acquiredAt: string, raw: Record<string, { value: number }> }[]): DriftView[] {
  return outcome.drift.filter(d => d.model !== 'none').map(d => ({
    ...d,
    points: rows.filter(r => r.material === d.material && r.raw[d.quantity]).map(r => ({ position: r.position, acquiredAt: r.acquiredAt, value: r.raw[d.quantity]!.value })),
  }))
}
