import { and, asc, desc, eq, lte, sql } from 'drizzle-orm'
import type { z } from 'zod'
import { fitCalibration, formulaSpecies, geometry as geometrySchema, isotope, processReadings } from '#shared/engine'
import type { AcquisitionInput } from '#shared/schemas/acquisitions'
import type { calibrationInput, CalibrationFromReferenceInput, InstrumentInput, InstrumentUpdate } from '#shared/schemas/instruments'
import type { Geometry } from '#shared/engine'
import { acquisitionRuns, acquisitions, calibrations, geometryVersions, instruments, labs } from '../../database/schema'
import { payloadOf } from '../store'

export async function listInstruments(labId: string) {
  const rows = await useDb().select().from(instruments).where(eq(instruments.labId, labId)).orderBy(asc(instruments.name), asc(instruments.id))
  const current = await Promise.all(rows.map(r => geometryAt(r.id, new Date())))
  return rows.map((r, i) => ({ ...r, geometry: current[i] ? { version: current[i]!.version, kind: current[i]!.kind, validFrom: current[i]!.validFrom } : null }))
}

async function instrumentOf(labId: string, id: string) {
  const row = await useDb().query.instruments.findFirst({ where: and(eq(instruments.id, id), eq(instruments.labId, labId)) })
  if (!row) throw problem(404, 'instrument-not-found', 'No such instrument in this lab.')
  return row
}

type GeometryVersion = typeof geometryVersions.$inferSelect

/** The geometry version in force at `at` among `versions`: the latest valid from at or before it. */
function inForceAt(versions: GeometryVersion[], at: Date): GeometryVersion | undefined {
  return versions.filter(v => v.validFrom <= at).sort((a, b) => b.validFrom.getTime() - a.validFrom.getTime() || b.version - a.version)[0]
}

function geometryVersionsOf(instrumentId: string) {
  return useDb().select().from(geometryVersions).where(eq(geometryVersions.instrumentId, instrumentId)).orderBy(desc(geometryVersions.version))
}

/** 404 unless lab `labId` has instrument `id`. */
export async function assertInstrument(labId: string, id: string) {
  await instrumentOf(labId, id)
}

export async function getInstrument(labId: string, id: string) {
  const db = useDb()
  const row = await instrumentOf(labId, id)
  const versions = await geometryVersionsOf(id)
  const cals = await db.select().from(calibrations).where(eq(calibrations.instrumentId, id)).orderBy(desc(calibrations.version))
  // A calibration belongs to the geometry version it was fitted under (stored in its fit;
  // for fits from before engine 2, the version in force at its validFrom). Once another
  // geometry version is in force, it is retired: ingest does not apply it.
  const versionAt = (at: Date) => inForceAt(versions, at)?.version ?? null
  const inForce = inForceAt(versions, new Date())
  return {
    ...row,
    geometryVersions: versions,
    calibrations: cals.map((c) => {
      const geometryVersion = (c.fit as { geometryVersion?: number | null }).geometryVersion ?? versionAt(c.validFrom)
      return { ...c, geometryVersion, retired: !!inForce && geometryVersion !== inForce.version }
    }),
  }
}

export async function createInstrument(audit: AuditContext, labId: string, input: InstrumentInput) {
  if (input.measuredSpecies?.length) checkSpeciesLabels(input.measuredSpecies)
  return useDb().transaction(async (tx) => {
    if (await tx.query.instruments.findFirst({ where: and(eq(instruments.labId, labId), eq(instruments.slug, input.slug)), columns: { id: true } })) {
      throw fieldProblem('slug', 'another instrument of this lab uses this slug', 409, 'slug-taken')
    }
    const instrument = firstRow(await tx.insert(instruments).values({ labId, slug: input.slug, name: input.name, measuredSpecies: input.measuredSpecies?.length ? input.measuredSpecies : null }).returning())
    await tx.insert(geometryVersions).values({
      instrumentId: instrument.id, version: 1, kind: input.geometry.kind, params: input.geometry as unknown as Record<string, unknown>,
      validFrom: input.validFrom ?? new Date(), createdBy: audit.actor.id,
    })
    await recordAudit(tx, { ...audit, action: 'instrument.created', targetType: 'instrument', targetId: instrument.id, detail: { labId, slug: input.slug, kind: input.geometry.kind } })
    return instrument
  })
}

/**
 * A label the engine cannot read would silently match nothing: refuse it, naming the entry.
 * An isotope label ('40Ar'), else an element symbol or formula the formula reader takes.
 */
function checkSpeciesLabels(labels: string[]) {
  labels.forEach((label, i) => {
    try { isotope(label) }
    catch {
      try { formulaSpecies(label) }
      catch (error) { throw fieldProblem(`measuredSpecies.${i}`, error instanceof Error ? error.message : 'is not a species label the engine reads') }
    }
  })
}

/** Renames an instrument or registers the species it measures (an empty list clears it). */
export async function updateInstrument(audit: AuditContext, labId: string, id: string, input: InstrumentUpdate) {
  const species = input.measuredSpecies === undefined ? undefined : input.measuredSpecies?.length ? input.measuredSpecies : null
  if (species) checkSpeciesLabels(species)
  return useDb().transaction(async (tx) => {
    const [row] = await tx.update(instruments).set({ name: input.name, measuredSpecies: species, updatedAt: new Date() })
      .where(and(eq(instruments.id, id), eq(instruments.labId, labId))).returning()
    if (!row) throw problem(404, 'instrument-not-found', 'No such instrument in this lab.')
    if (input.name !== undefined) await recordAudit(tx, { ...audit, action: 'instrument.renamed', targetType: 'instrument', targetId: id, detail: { name: input.name } })
    if (species !== undefined) await recordAudit(tx, { ...audit, action: 'instrument.species-registered', targetType: 'instrument', targetId: id, detail: { measuredSpecies: species } })
    return row
  })
}

export async function addGeometryVersion(audit: AuditContext, labId: string, instrumentId: string, input: { geometry: Geometry, validFrom: Date, note?: string }) {
  await instrumentOf(labId, instrumentId)
  return useDb().transaction(async (tx) => {
    const [last] = await tx.select({ version: geometryVersions.version }).from(geometryVersions)
      .where(eq(geometryVersions.instrumentId, instrumentId)).orderBy(desc(geometryVersions.version)).limit(1).for('update')
    const row = firstRow(await tx.insert(geometryVersions).values({
      instrumentId, version: (last?.version ?? 0) + 1, kind: input.geometry.kind, params: input.geometry as unknown as Record<string, unknown>,
      validFrom: input.validFrom, note: input.note, createdBy: audit.actor.id,
    }).returning())
    await recordAudit(tx, { ...audit, action: 'instrument.geometry-versioned', targetType: 'instrument', targetId: instrumentId, detail: { version: row.version, validFrom: row.validFrom } })
    return row
  })
}

/** Fits a calibration with the engine and stores it as the next version; a refused fit is a 422 naming why. */
export async function addCalibration(audit: AuditContext, labId: string, instrumentId: string, input: z.output<typeof calibrationInput>) {
  await instrumentOf(labId, instrumentId)
  // Bound to the geometry version its reference peaks were measured under: the one named, or
  // the one in force when it becomes valid, or (valid before any) the first.
  const versions = await geometryVersionsOf(instrumentId)
  const geo = input.geometryVersion !== undefined
    ? versions.find(v => v.version === input.geometryVersion)
    : inForceAt(versions, input.validFrom) ?? versions.at(-1)
  if (!geo) throw fieldProblem('geometryVersion', 'this instrument has no such geometry version')
  let fit
  try { fit = fitCalibration(input.points, input.degree, geo.version) }
  catch (error) { engineProblem(error) }
  return useDb().transaction(async (tx) => {
    const [last] = await tx.select({ version: calibrations.version }).from(calibrations)
      .where(eq(calibrations.instrumentId, instrumentId)).orderBy(desc(calibrations.version)).limit(1).for('update')
    const row = firstRow(await tx.insert(calibrations).values({
      instrumentId, version: (last?.version ?? 0) + 1, fit: fit as unknown as Record<string, unknown>, points: input.points, validFrom: input.validFrom, createdBy: audit.actor.id,
    }).returning())
    await recordAudit(tx, { ...audit, action: 'instrument.calibrated', targetType: 'instrument', targetId: instrumentId, detail: { version: row.version, rmsPpm: fit.rmsPpm } })
    return row
  })
}

/**
 * Proposes a calibration from a reference acquisition of the instrument: its raw readings
 * are run through the engine with the geometry in force when it was acquired and NO
 * calibration, the unambiguously assigned peaks become reference points (measured m/z →
 * the assigned ion's m/z), and the fit is returned for review, not stored.
 */
export async function calibrationFromReference(labId: string, instrumentId: string, input: CalibrationFromReferenceInput) {
  const [row] = await useDb().select({ payload: acquisitions.payload, arraysSha256: acquisitions.arraysSha256, rawRemovedAt: acquisitions.rawRemovedAt, acquiredAt: acquisitions.acquiredAt, runId: acquisitions.externalId }).from(acquisitions)
    .where(and(eq(acquisitions.id, input.acquisitionId), eq(acquisitions.instrumentId, instrumentId), eq(acquisitions.labId, labId))).limit(1)
  if (!row) throw fieldProblem('acquisitionId', 'no acquisition of this instrument has this id')
  const payload = await payloadOf<AcquisitionInput>(row)
  if (payload.mzSpectrum) throw fieldProblem('acquisitionId', 'this acquisition arrived already in m/z, so the geometry played no part; choose one sent as raw readings')
  const geo = await geometryAt(instrumentId, row.acquiredAt)
  if (!geo) throw fieldProblem('acquisitionId', 'was acquired before the instrument\'s first geometry')
  const { measuredSpecies } = await instrumentOf(labId, instrumentId)
  try {
    const engine = processReadings(geometrySchema.parse(geo.params), { settings: payload.settings, sweep: payload.sweep, detectors: payload.detectors }, {
      tolerance: { ppm: input.tolerancePpm }, formulas: payload.processing?.formulas, isotopes: payload.processing?.isotopes, maxCharge: payload.processing?.maxCharge, calibration: null,
      measuredSpecies: payload.processing?.measuredSpecies ?? measuredSpecies ?? undefined,
      compatibility: payload.processing?.engine,
    })
    const points = engine.peaks.filter(p => p.assignment && !p.ambiguous).map(p => ({
      measuredMz: p.centroid, referenceMz: p.assignment!.mz, label: p.assignment!.z > 1 ? `${p.assignment!.species} (z=${p.assignment!.z})` : p.assignment!.species,
    }))
    // Unweighted: the centroid uncertainty the engine reports here is the geometry's, common
    // to every peak, not each peak's own scatter; it would weight the points by m/z only.
    return { acquisitionId: input.acquisitionId, runId: row.runId, geometryVersion: geo.version, points, fit: fitCalibration(points, input.degree, geo.version) }
  }
  catch (error) { engineProblem(error, 'reference.') }
}

export interface InstrumentContext {
  id: string
  slug: string
  geometry: { id: string, version: number, params: Record<string, unknown> } | null
  /** The latest calibration valid at the time, with the geometry version it was fitted under. */
  calibration: { id: string, version: number, fit: Record<string, unknown>, geometryVersion: number | null } | null
  /** The species the instrument measures, when registered. */
  measuredSpecies: string[] | null
  runSeen: boolean
  /** The lab's release rule (issue 20): 'auto' releases a result whose QC codes are all in `allows`. */
  release: { policy: 'review' | 'auto', allows: string[] }
}

interface ContextQuery { labId: string, slug: string, at: string, runId: string }

// The lookups of one event-loop turn go to PostgreSQL as one statement (batchPerTurn).
const lookUpTogether = batchPerTurn<ContextQuery, InstrumentContext | undefined>(async (queries) => {
  const rows = await useDb().execute<{ ord: number, id: string | null, slug: string, geometry: InstrumentContext['geometry'], calibration: InstrumentContext['calibration'], measured_species: string[] | null, run_seen: boolean, release: InstrumentContext['release'] }>(sql`
    select q.ord, i.id, i.slug, i.measured_species,
      (select json_build_object('id', g.id, 'version', g.version, 'params', g.params) from ${geometryVersions} g
        where g.instrument_id = i.id and g.valid_from <= q.at order by g.valid_from desc, g.version desc limit 1) as geometry,
      (select json_build_object('id', c.id, 'version', c.version, 'fit', c.fit, 'geometryVersion', coalesce((c.fit->>'geometryVersion')::int,
          (select g2.version from ${geometryVersions} g2 where g2.instrument_id = i.id and g2.valid_from <= c.valid_from order by g2.valid_from desc, g2.version desc limit 1)))
        from ${calibrations} c
        where c.instrument_id = i.id and c.valid_from <= q.at order by c.valid_from desc, c.version desc limit 1) as calibration,
      exists (select 1 from ${acquisitionRuns} ar where ar.lab_id = q.lab_id and ar.external_id = q.run_id) as run_seen,
      (select json_build_object('policy', l.release_policy, 'allows', l.auto_release_allows) from ${labs} l where l.id = q.lab_id) as release
    from jsonb_to_recordset(${JSON.stringify(queries.map((q, ord) => ({ ord, lab_id: q.labId, slug: q.slug, at: q.at, run_id: q.runId })))}::jsonb)
      as q(ord int, lab_id uuid, slug text, at timestamptz, run_id text)
    left join ${instruments} i on i.lab_id = q.lab_id and i.slug = q.slug`)
  const byOrd = new Map([...rows].map(r => [Number(r.ord), r]))
  return queries.map((_, ord) => {
    const row = byOrd.get(ord)
    return { value: row?.id ? { id: row.id, slug: row.slug, geometry: row.geometry, calibration: row.calibration, measuredSpecies: row.measured_species, runSeen: row.run_seen, release: row.release } : undefined }
  })
})

/**
 * What ingest needs to know about a lab's instrument, in one round trip: the geometry and
 * calibration versions in force at `at`, and whether the lab already sent `runId`.
 */
export function instrumentContextAt(labId: string, slug: string, at: Date, runId: string): Promise<InstrumentContext | undefined> {
  return lookUpTogether({ labId, slug, at: at.toISOString(), runId })
}

/** When the instrument's earliest geometry version becomes valid (null: none registered). */
export async function firstGeometryFrom(instrumentId: string): Promise<Date | null> {
  const [row] = await useDb().select({ validFrom: geometryVersions.validFrom }).from(geometryVersions)
    .where(eq(geometryVersions.instrumentId, instrumentId)).orderBy(asc(geometryVersions.validFrom)).limit(1)
  return row?.validFrom ?? null
}

/** The geometry version in force at `at`: the latest one valid from at or before it. */
export async function geometryAt(instrumentId: string, at: Date, db: Queryable = useDb()) {
  const [row] = await db.select().from(geometryVersions)
    .where(and(eq(geometryVersions.instrumentId, instrumentId), lte(geometryVersions.validFrom, at)))
    .orderBy(desc(geometryVersions.validFrom), desc(geometryVersions.version)).limit(1)
  return row
}

export async function calibrationAt(instrumentId: string, at: Date, db: Queryable = useDb()) {
  const [row] = await db.select().from(calibrations)
    .where(and(eq(calibrations.instrumentId, instrumentId), lte(calibrations.validFrom, at)))
    .orderBy(desc(calibrations.validFrom), desc(calibrations.version)).limit(1)
  return row
}
