import { and, asc, desc, eq, inArray, max, sql } from 'drizzle-orm'
import { referenceMaterials as referenceMaterialRegistry } from '#shared/engine'
import { ATMOSPHERIC_ARGON } from '#shared/engine/isotopes/massBias'
import type { MaterialValues, Measured } from '#shared/engine/isotopes/types'
import type { WorkingStandardInput, WorkingStandardView } from '#shared/schemas/sequences'
import { referenceMaterials, workingStandards } from '../../database/schema'

// Reference materials (the hub's registry, the same for every lab) and each lab's working
// standards, versioned: a recalibration is a new version with its own validity.

export function listReferenceMaterials() {
  return useDb().select().from(referenceMaterials).orderBy(asc(referenceMaterials.id))
}

type StandardRow = typeof workingStandards.$inferSelect

export function workingStandardView(row: StandardRow): WorkingStandardView {
  return {
    id: row.id, code: row.code, version: row.version, name: row.name, values: row.values, calibratedAgainst: row.calibratedAgainst,
    validFrom: row.validFrom.toISOString(), validTo: row.validTo?.toISOString() ?? null, note: row.note, createdAt: row.createdAt.toISOString(),
  }
}

/** Every version of every working standard of a lab, by code and newest version first. */
export async function listWorkingStandards(labId: string): Promise<WorkingStandardView[]> {
  const rows = await useDb().select().from(workingStandards).where(eq(workingStandards.labId, labId)).orderBy(asc(workingStandards.code), desc(workingStandards.version))
  return rows.map(workingStandardView)
}

/**
 * A new version of a working standard. Its values must be calibrated against reference
 * materials the registry knows; the previous version's validity ends where this one begins.
 */
export async function createWorkingStandardVersion(labId: string, input: WorkingStandardInput, ctx: AuditContext): Promise<WorkingStandardView> {
  const known = new Set((await useDb().select({ id: referenceMaterials.id }).from(referenceMaterials).where(inArray(referenceMaterials.id, input.calibratedAgainst))).map(r => r.id))
  const unknown = input.calibratedAgainst.findIndex(id => !known.has(id))
  if (unknown >= 0) throw fieldProblem(`calibratedAgainst.${unknown}`, `no reference material "${input.calibratedAgainst[unknown]}" in the registry`)
  if (await useDb().query.referenceMaterials.findFirst({ where: eq(referenceMaterials.id, input.code), columns: { id: true } })) {
    throw fieldProblem('code', 'is the id of a reference material; give the lab\'s own standard another code')
  }
  const validFrom = new Date(input.validFrom)
  return useDb().transaction(async (tx) => {
    // Versions of one code are numbered under a lock on the code's rows, so two at once cannot take one number.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${`standard:${labId}:${input.code}`}))`)
    const [{ last } = { last: 0 }] = await tx.select({ last: max(workingStandards.version) }).from(workingStandards).where(and(eq(workingStandards.labId, labId), eq(workingStandards.code, input.code)))
    const [previous] = await tx.select().from(workingStandards).where(and(eq(workingStandards.labId, labId), eq(workingStandards.code, input.code))).orderBy(desc(workingStandards.version)).limit(1)
    if (previous && previous.validFrom >= validFrom) throw fieldProblem('validFrom', `must be after version ${previous.version}'s validFrom (${previous.validFrom.toISOString()})`)
    if (previous && (!previous.validTo || previous.validTo > validFrom)) await tx.update(workingStandards).set({ validTo: validFrom }).where(eq(workingStandards.id, previous.id))
    const row = firstRow(await tx.insert(workingStandards).values({
      labId, code: input.code, version: (last ?? 0) + 1, name: input.name, values: input.values, calibratedAgainst: input.calibratedAgainst,
      validFrom, validTo: input.validTo ? new Date(input.validTo) : null, note: input.note ?? null,
    }).returning())
    await recordAudit(tx, { ...ctx, action: 'standard.version-created', targetType: 'working-standard', targetId: row.id, detail: { labId, code: row.code, version: row.version } })
    return workingStandardView(row)
  })
}

/** A material as a sequence used it: which registry entry or standard version, and its values. */
export interface ResolvedMaterial extends MaterialValues { kind: 'reference-material' | 'working-standard', version: number | null }

/**
 * The materials `uses` name, each at the time it was measured: a reference material, or the
 * lab's working-standard version valid then. Unknown names (or a standard with no version in
 * force at that time) come back in `missing`, by the index of the use.
 */
export async function materialsAt(labId: string, uses: { material: string, at: Date }[]): Promise<{ found: Map<number, ResolvedMaterial>, missing: number[] }> {
  const names = [...new Set(uses.map(u => u.material))]
  const found = new Map<number, ResolvedMaterial>()
  if (!names.length) return { found, missing: [] }
  const [refs, standards] = await Promise.all([
    useDb().select().from(referenceMaterials).where(inArray(referenceMaterials.id, names)),
    useDb().select().from(workingStandards).where(and(eq(workingStandards.labId, labId), inArray(workingStandards.code, names))).orderBy(desc(workingStandards.version)),
  ])
  const refById = new Map(refs.map(r => [r.id, r]))
  const missing: number[] = []
  uses.forEach((use, i) => {
    const ref = refById.get(use.material)
    if (ref) {
      found.set(i, { id: ref.id, name: ref.name, source: ref.source, kind: 'reference-material', version: null, values: Object.fromEntries(Object.entries(ref.values).map(([q, v]) => [q, { value: v.value, u: v.u } satisfies Measured])) })
      return
    }
    const std = standards.find(s => s.code === use.material && s.validFrom <= use.at && (!s.validTo || s.validTo > use.at))
    if (!std) { missing.push(i); return }
    found.set(i, { id: std.code, name: std.name, source: `working standard ${std.code} v${std.version}, calibrated against ${std.calibratedAgainst.join(', ')}`, kind: 'working-standard', version: std.version, values: std.values })
  })
  return { found, missing }
}

/**
 * Writes the engine's registry of reference materials into the database (idempotent: run at
 * every start, so a corrected value in a new build reaches the table).
 */
export async function seedReferenceMaterials() {
  const rows = Object.values(referenceMaterialRegistry).map(m => ({ id: m.id, name: m.name, values: m.values, source: m.source, fromMemory: m.fromMemory, updatedAt: new Date() }))
  // Air argon, the noble-gas labs' standard, is the mass-bias engine's constant (its source says "from memory").
  if (!rows.some(r => r.id === ATMOSPHERIC_ARGON.id)) rows.push({ ...ATMOSPHERIC_ARGON, fromMemory: /from memory/.test(ATMOSPHERIC_ARGON.source), updatedAt: new Date() })
  if (!rows.length) return
  await useDb().insert(referenceMaterials).values(rows).onConflictDoUpdate({
    target: referenceMaterials.id,
    set: { name: sql`excluded.name`, values: sql`excluded.values`, source: sql`excluded.source`, fromMemory: sql`excluded.from_memory`, updatedAt: sql`excluded.updated_at` },
  })
}
