import { and, asc, desc, eq, inArray, lte, max, sql } from 'drizzle-orm'
import type { MethodInput, MethodView } from '#shared/schemas/sequences'
import { instruments, methods, referenceMaterials, workingStandards } from '../../database/schema'

// Methods per instrument, versioned like geometries: a new version is valid from a time, and
// a sequence runs under the version in force at its first acquisition (or the one it names).

type MethodRow = typeof methods.$inferSelect

export function methodView(row: MethodRow, instrument: string): MethodView {
  return {
    id: row.id, instrument, version: row.version, name: row.name, validFrom: row.validFrom.toISOString(),
    definition: row.definition, note: row.note, createdAt: row.createdAt.toISOString(), releasePolicy: row.releasePolicy,
  }
}

/** The lab's instrument with this slug, or a problem naming `field` (404 when it is a path). */
export async function labInstrument(labId: string, slug: string, field = 'instrument') {
  const row = await useDb().query.instruments.findFirst({ where: and(eq(instruments.labId, labId), eq(instruments.slug, slug)), columns: { id: true, slug: true, labId: true } })
  if (!row) throw field === 'path' ? problem(404, 'instrument-not-found', 'No instrument with this slug in your lab.') : fieldProblem(field, 'no instrument with this slug in your lab')
  return row
}

/**
 * A new method version for an instrument. Every material the method names (anchors, drift
 * and mass-bias standards) must be a reference material or one of the lab's working standards.
 */
export async function createMethodVersion(labId: string, instrumentSlug: string, input: MethodInput, ctx: AuditContext): Promise<MethodView> {
  const instrument = await labInstrument(labId, instrumentSlug, 'path')
  const named: { path: string, id: string }[] = []
  input.definition.steps.forEach((step, i) => {
    if (step.step === 'normalise') step.anchors.forEach((id, j) => named.push({ path: `definition.steps.${i}.anchors.${j}`, id }))
    if (step.step === 'drift') named.push({ path: `definition.steps.${i}.material`, id: step.material })
    if (step.step === 'mass-bias' && step.material) named.push({ path: `definition.steps.${i}.material`, id: step.material })
  })
  await checkMaterialsExist(labId, named)
  const validFrom = new Date(input.validFrom)
  return useDb().transaction(async (tx) => {
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${`method:${instrument.id}`}))`)
    const [{ last } = { last: 0 }] = await tx.select({ last: max(methods.version) }).from(methods).where(eq(methods.instrumentId, instrument.id))
    const row = firstRow(await tx.insert(methods).values({
      instrumentId: instrument.id, version: (last ?? 0) + 1, name: input.name, definition: input.definition, validFrom, note: input.note ?? null,
      // The four-eyes rule: whoever registered the method version may not release what it produced.
      createdBy: ctx.actor.id, releasePolicy: input.releasePolicy ?? null,
    }).returning())
    await recordAudit(tx, { ...ctx, action: 'method.version-created', targetType: 'method', targetId: row.id, detail: { labId, instrument: instrument.slug, version: row.version } })
    return methodView(row, instrument.slug)
  })
}

async function checkMaterialsExist(labId: string, named: { path: string, id: string }[]) {
  if (!named.length) return
  const ids = [...new Set(named.map(n => n.id))]
  const [refs, stds] = await Promise.all([
    useDb().select({ id: referenceMaterials.id }).from(referenceMaterials).where(inArray(referenceMaterials.id, ids)),
    useDb().selectDistinct({ id: workingStandards.code }).from(workingStandards).where(and(eq(workingStandards.labId, labId), inArray(workingStandards.code, ids))),
  ])
  const known = new Set([...refs, ...stds].map(r => r.id))
  const bad = named.find(n => !known.has(n.id))
  if (bad) throw fieldProblem(bad.path, `no reference material or working standard "${bad.id}" in your lab`)
}

/** Every method version of an instrument, newest first. */
export async function listMethodVersions(labId: string, instrumentSlug: string): Promise<MethodView[]> {
  const instrument = await labInstrument(labId, instrumentSlug, 'path')
  const rows = await useDb().select().from(methods).where(eq(methods.instrumentId, instrument.id)).orderBy(desc(methods.version))
  return rows.map(r => methodView(r, instrument.slug))
}

/** Each instrument of a lab with its method versions (newest first) and the one in force now. */
export async function methodsByInstrument(labId: string) {
  const rows = await useDb().select({ method: methods, slug: instruments.slug, instrumentId: instruments.id, instrumentName: instruments.name })
    .from(instruments).leftJoin(methods, eq(methods.instrumentId, instruments.id))
    .where(eq(instruments.labId, labId)).orderBy(asc(instruments.slug), desc(methods.version))
  const now = new Date()
  const byInstrument = new Map<string, { instrumentId: string, instrument: string, name: string, current: MethodView | null, versions: MethodView[] }>()
  for (const r of rows) {
    const entry = byInstrument.get(r.instrumentId) ?? { instrumentId: r.instrumentId, instrument: r.slug, name: r.instrumentName, current: null, versions: [] }
    byInstrument.set(r.instrumentId, entry)
    if (!r.method) continue
    const view = methodView(r.method, r.slug)
    entry.versions.push(view)
    if (!entry.current && r.method.validFrom <= now) entry.current = view
  }
  return [...byInstrument.values()]
}

/** The method version in force on an instrument at `at` (the newest valid by then). */
export async function methodInForce(instrumentId: string, at: Date): Promise<MethodRow | undefined> {
  const [row] = await useDb().select().from(methods).where(and(eq(methods.instrumentId, instrumentId), lte(methods.validFrom, at))).orderBy(desc(methods.validFrom), desc(methods.version)).limit(1)
  return row
}

/** The instrument's method in force now, for `GET /api/v1/instruments/{slug}/method`. */
export async function currentMethod(labId: string, instrumentSlug: string): Promise<MethodView> {
  const instrument = await labInstrument(labId, instrumentSlug, 'path')
  const row = await methodInForce(instrument.id, new Date())
  if (!row) throw problem(404, 'method-not-found', 'This instrument has no method in force; register one first.')
  return methodView(row, instrument.slug)
}

export async function methodVersion(instrumentId: string, version: number): Promise<MethodRow | undefined> {
  return useDb().query.methods.findFirst({ where: and(eq(methods.instrumentId, instrumentId), eq(methods.version, version)) })
}
