import { and, asc, eq, isNull, min, sql } from 'drizzle-orm'
import { EngineError, acceptedValue, cyclesFromStaticReadings, geometry as geometrySchema, nominalMzByCollector, processDeltaSequence, processRatioSequence, sequenceItemFromResult, type EngineResult, type StaticCycleInput } from '#shared/engine'
import type { MaterialValues, SequenceItem, SequenceOutcome } from '#shared/engine/isotopes/types'
import { CAUTION } from '#shared/caution'
import { standardRoles, type SequenceEventData } from '#shared/schemas/sequences'
import { releasesAutomatically } from '#shared/releaseRule'
import { acquisitions, geometryVersions, instruments, labs, methods, results, sequenceItems, sequences } from '../../database/schema'
import { kickDeliveries, recordLabEvent } from '../delivery'
import { loadPayload } from '../store'
import { methodInForce, methodVersion } from './methods'
import { materialsAt, type ResolvedMaterial } from './materials'
import { appendControlPoints, type NewControlPoint } from './charts'

// Processing a closed sequence: every acquisition was processed by the engine at ingest; here
// their results become the engine's sequence items, the method version and the standards in
// force at each acquisition's time are loaded, and the δ engine (CO2, N2, O2, H2) or the
// mass-bias engine (Ar) runs over the whole sequence. The outcome and the standards' control-chart
// points commit together; the outcome is held for the lab's review unless the release rule
// (the method's policy, else the lab's) releases it at once, in which case the
// `sequence.processed` event (with its deliveries) commits with it. A held outcome's event
// is recorded when a reviewer releases it (server/services/review, `sequenceEventData`).

export const SEQUENCE_EVENT = 'sequence.processed'

type SequenceRow = typeof sequences.$inferSelect
type MethodRow = typeof methods.$inferSelect
interface Failure { code: string, message: string, field?: string }

async function members(sequenceId: string) {
  const rows = await useDb().select({
    position: sequenceItems.position, role: sequenceItems.role, material: sequenceItems.material,
    acquisitionId: acquisitions.id, runId: acquisitions.externalId, sampleRef: acquisitions.sampleRef, acquiredAt: acquisitions.acquiredAt,
    summary: results.summary, reviewState: results.reviewState,
    // Static-vacuum readings with their cycle times (noble gases' time-zero step): the columns
    // are read only for the acquisitions that gave `cycleSeconds`, not for every sweep.
    cycleSeconds: sql<number[] | null>`${acquisitions.payload}->'cycleSeconds'`,
    cycleColumns: sql<StaticCycleInput['detectors'] | null>`case when ${acquisitions.payload} ? 'cycleSeconds' then ${acquisitions.payload}->'detectors' end`,
    geometry: geometryVersions.params,
    arraysSha256: acquisitions.arraysSha256, staticMode: sql<boolean>`${results.summary}->>'mode' = 'static'`,
  }).from(sequenceItems)
    .innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt), isNull(results.supersededBy)))
    .innerJoin(geometryVersions, eq(geometryVersions.id, results.geometryVersionId))
    .where(eq(sequenceItems.sequenceId, sequenceId)).orderBy(asc(sequenceItems.position))
  // Raw data in the object store: the static acquisitions' cycle times and columns come from
  // their arrays objects (sweeps need none of it).
  return Promise.all(rows.map(async ({ arraysSha256, staticMode, ...m }) => {
    if (!arraysSha256 || !staticMode) return m
    const body = await loadPayload<{ cycleSeconds?: number[], detectors: StaticCycleInput['detectors'] }>(arraysSha256)
    return { ...m, cycleSeconds: body.cycleSeconds ?? null, cycleColumns: body.cycleSeconds ? body.detectors : null }
  }))
}
type Member = Awaited<ReturnType<typeof members>>[number]

async function methodFor(row: SequenceRow): Promise<MethodRow | undefined> {
  if (row.requestedMethodVersion !== null) return methodVersion(row.instrumentId, row.requestedMethodVersion)
  const [first] = await useDb().select({ at: min(acquisitions.acquiredAt) }).from(sequenceItems)
    .innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId)).where(eq(sequenceItems.sequenceId, row.id))
  return methodInForce(row.instrumentId, first?.at ?? row.createdAt)
}

/** Where in the request an engine refusal points: an acquisition by position, or the method. */
function failureOf(error: EngineError, list: Member[]): Failure {
  const item = /^items\[(\d+)\](.*)$/.exec(error.field)
  const message = error.message.replace(/^[^:]+: /, '')
  if (item) {
    const m = list[Number(item[1])]
    // The engine's `cycles` are built from the acquisition's `cycleSeconds`: missing, it is that field the lab must send.
    if (m && error.code === 'missing-cycles') return { code: error.code, message: `${message}: post the acquisition's cycleSeconds with its detector columns`, field: `position.${m.position}.acquisition.cycleSeconds` }
    return { code: error.code, message, field: m ? `position.${m.position}${item[2]!.replace(/\[(\d+)\]/g, '.$1')}` : 'acquisitions' }
  }
  const field = error.field.replace(/\[(\d+)\]/g, '.$1')
  return { code: error.code, message, field: field.startsWith('method.') ? field : `method.${field}` }
}

/**
 * Runs the engine over a closed sequence and stores what came out: `processed` with its
 * outcome (and the event partners receive), or `failed` with the reason.
 */
export async function processSequence(row: SequenceRow): Promise<void> {
  try { await runSequence(row) }
  catch (error) {
    // A fault of Arcwise's own, not of the sequence: it is left failed, not closed for ever, and can be reprocessed.
    logError('[sequences] processing failed', error)
    await fail(row, null, { code: 'processing-error', message: 'processing stopped on an internal error; the hub\'s operators have the log' })
  }
}

/**
 * The standards' materials and those the method names that the sequence did not measure (the
 * engine says which anchors are missing): each of the latter is resolved at the sequence's
 * last acquisition.
 */
async function withMethodMaterials(row: SequenceRow, method: MethodRow, list: Member[], found: Map<unknown, ResolvedMaterial>) {
  const materials = new Map<string, ResolvedMaterial>()
  for (const material of found.values()) materials.set(material.id, material)
  const named = methodMaterials(method).filter(id => !materials.has(id))
  if (named.length) {
    const last = list.at(-1)?.acquiredAt ?? new Date()
    const more = await materialsAt(row.labId, named.map(material => ({ material, at: last })))
    for (const material of more.found.values()) materials.set(material.id, material)
  }
  return materials
}

async function runSequence(row: SequenceRow): Promise<void> {
  const list = await members(row.id)
  const method = await methodFor(row)
  if (!method) return fail(row, null, { code: 'no-method', field: 'method', message: 'the instrument has no method in force at the sequence\'s first acquisition' })
  const uses = list.map(m => ({ material: m.material ?? '', at: m.acquiredAt }))
  const standardsAt = list.map((m, i) => m.material ? i : -1).filter(i => i >= 0)
  const { found, missing } = await materialsAt(row.labId, standardsAt.map(i => uses[i]!))
  if (missing.length) {
    const m = list[standardsAt[missing[0]!]!]!
    return fail(row, method, { code: 'unknown-material', field: `position.${m.position}.material`, message: `no material "${m.material}" valid at ${m.acquiredAt.toISOString()}` })
  }
  const materials = await withMethodMaterials(row, method, list, found)

  let outcome: SequenceOutcome
  try {
    const items: SequenceItem[] = list.map(itemOf)
    const values: MaterialValues[] = [...materials.values()].map(({ id, name, values, source }) => ({ id, name, values, source }))
    outcome = method.definition.gas === 'Ar'
      ? processRatioSequence(method.definition, items, values)
      : processDeltaSequence(method.definition, items, Object.fromEntries(values.map(v => [v.id, v])))
  }
  catch (error) {
    if (error instanceof EngineError) return fail(row, method, failureOf(error, list))
    throw error
  }

  const points = controlPointsOf(row, outcome, list, materials)
  await useDb().transaction(async (tx) => {
    const appended = await appendControlPoints(tx, points)
    const flagged = appended.some(p => p.violations.length > 0)
    const flags = appended.filter(p => p.violations.length).map(p => ({ code: 'control-chart-violation', message: `${p.material} ${p.quantity}: ${p.violations.join(', ')}`, position: p.position ?? undefined }))
    const stored: SequenceOutcome = { ...outcome, flags: [...outcome.flags, ...flags] }
    const lab = await tx.query.labs.findFirst({ where: eq(labs.id, row.labId), columns: { releasePolicy: true, autoReleaseAllows: true } })
    // An outcome over members still held (or rejected) waits for review whatever the rule says:
    // partners would receive values from results they may not see.
    const membersReleased = list.every(m => m.reviewState === 'released')
    const released = membersReleased && releasesAutomatically(method.releasePolicy ?? lab?.releasePolicy ?? 'review', lab?.autoReleaseAllows ?? [], stored.flags.map(f => f.code))
    const [processed] = await tx.update(sequences).set({
      status: 'processed', outcome: stored, methodId: method.id, flagged, failure: null, processedAt: sql`now()`,
      reviewState: released ? 'released' : 'held', releasedAt: released ? sql`now()` : null, reviewedBy: null, reviewedAt: released ? sql`now()` : null,
    }).where(eq(sequences.id, row.id)).returning()
    if (!released) return
    const instrument = await tx.query.instruments.findFirst({ where: eq(instruments.id, row.instrumentId), columns: { slug: true } })
    const data = eventData(processed!, instrument?.slug ?? '', method, stored, list, materials, flagged)
    // result-event v1 does not describe this message: endpoints on v2 or later only.
    await recordLabEvent(tx, row.labId, SEQUENCE_EVENT, data, 2)
  })
  kickDeliveries()
}

/**
 * The `sequence.processed` message of a processed sequence, rebuilt from what is stored (its
 * members' results, its method, the materials in force), for its release by a reviewer.
 */
export async function sequenceEventData(row: SequenceRow, reviewer: string | null = null): Promise<SequenceEventData> {
  const list = await members(row.id)
  const method = row.methodId ? await useDb().query.methods.findFirst({ where: eq(methods.id, row.methodId) }) : undefined
  if (!method || !row.outcome) throw problem(409, 'sequence-not-processed', 'This sequence has no processed outcome to release.')
  const standardsAt = list.map((m, i) => m.material ? i : -1).filter(i => i >= 0)
  const { found } = await materialsAt(row.labId, standardsAt.map(i => ({ material: list[i]!.material ?? '', at: list[i]!.acquiredAt })))
  const materials = await withMethodMaterials(row, method, list, found)
  const instrument = await useDb().query.instruments.findFirst({ where: eq(instruments.id, row.instrumentId), columns: { slug: true } })
  return { ...eventData(row, instrument?.slug ?? '', method, row.outcome, list, materials, row.flagged), reviewedBy: reviewer }
}

/** A member as the engine's sequence item; static readings with cycle times carry their cycles. */
function itemOf(m: Member, index: number): SequenceItem {
  const result = m.summary as unknown as EngineResult
  const item = sequenceItemFromResult(result, { position: m.position, role: m.role, material: m.material ?? undefined, acquiredAt: m.acquiredAt.getTime() })
  if (!m.cycleSeconds || !m.cycleColumns) return item
  try {
    const cycles = cyclesFromStaticReadings({
      geometry: geometrySchema.parse(m.geometry), detectors: m.cycleColumns, cycleSeconds: m.cycleSeconds,
      collectorMz: nominalMzByCollector(result.peaks),
    })
    return { ...item, cycles }
  }
  catch (error) {
    // The engine names the field of the acquisition; the sequence names the item.
    if (error instanceof EngineError) throw new EngineError(`items[${index}].${error.field}`, error.code, error.message.slice(error.field.length + 2))
    throw error
  }
}

/** Every material a method names (anchors, drift and mass-bias standards). */
function methodMaterials(method: MethodRow): string[] {
  return method.definition.steps.flatMap(s => s.step === 'normalise' ? s.anchors : s.step === 'drift' ? [s.material] : s.step === 'mass-bias' && s.material ? [s.material] : [])
}

async function fail(row: SequenceRow, method: MethodRow | null, failure: Failure) {
  await useDb().update(sequences).set({ status: 'failed', failure, methodId: method?.id ?? null, processedAt: sql`now()` }).where(eq(sequences.id, row.id))
}

/** Each standard's final value against its accepted value, per quantity: a control-chart point. */
function controlPointsOf(row: SequenceRow, outcome: SequenceOutcome, list: Member[], materials: Map<string, ResolvedMaterial>): NewControlPoint[] {
  const at = new Map(list.map(m => [m.position, m.acquiredAt]))
  return outcome.items.flatMap((item) => {
    if (!standardRoles.includes(item.role) || !item.material) return []
    const material = materials.get(item.material)
    if (!material) return []
    return Object.entries(item.final).flatMap(([quantity, final]) => {
      // On the final value's scale (δ18O of CO2 converted between VPDB and VSMOW when the material states the other).
      const accepted = final.scale && !/measured/.test(final.scale) ? safeAccepted(material, quantity, final.scale) : (Object.hasOwn(material.values, quantity) ? material.values[quantity] : undefined)
      if (!accepted) return []
      return [{ labId: row.labId, instrumentId: row.instrumentId, material: item.material!, quantity, at: at.get(item.position)!, value: final.value, accepted: accepted.value, u: Math.hypot(final.u, accepted.u), sequenceId: row.id, position: item.position }]
    })
  })
}

function safeAccepted(material: MaterialValues, quantity: string, scale: string) {
  try { return acceptedValue(material, quantity, scale) }
  catch (error) {
    if (error instanceof EngineError) return undefined
    throw error
  }
}

function eventData(row: SequenceRow, instrument: string, method: MethodRow, outcome: SequenceOutcome, list: Member[], materials: Map<string, ResolvedMaterial>, flagged: boolean): SequenceEventData {
  const byPosition = new Map(list.map(m => [m.position, m]))
  return {
    kind: 'sequence', id: row.id, sequenceId: row.externalId, instrument, status: 'processed', processedAt: (row.processedAt ?? new Date()).toISOString(),
    releasedAt: (row.releasedAt ?? new Date()).toISOString(), reviewedBy: null,
    accepted: outcome.accepted, flagged,
    method: { id: method.id, version: method.version, name: method.name, gas: method.definition.gas },
    samples: outcome.items.filter(i => i.role === 'sample').map((item) => {
      const m = byPosition.get(item.position)!
      return {
        position: item.position, acquisitionId: m.acquisitionId, runId: m.runId, sampleRef: m.sampleRef, acquiredAt: m.acquiredAt.toISOString(),
        values: Object.entries(item.final).map(([quantity, v]) => ({ quantity, scale: v.scale, value: v.value, u: v.u, k: v.k, U: v.k * v.u, raw: item.raw[quantity] ?? null })),
        flags: item.flags,
      }
    }),
    standards: outcome.items.filter(i => standardRoles.includes(i.role) && i.material).map(item => ({
      position: item.position, material: item.material!, role: item.role, acquiredAt: byPosition.get(item.position)!.acquiredAt.toISOString(), values: item.final, residual: item.residual ?? null,
    })),
    materials: [...materials.values()].map(m => ({ id: m.id, kind: m.kind, version: m.version, values: m.values })),
    normalisation: outcome.normalisation, drift: outcome.drift, steps: outcome.steps, flags: outcome.flags,
    caution: CAUTION,
  }
}

