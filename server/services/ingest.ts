import { createHash } from 'node:crypto'
import { and, eq, sql } from 'drizzle-orm'
import { geometry as geometrySchema, processMzSpectrum, processReadings, type EngineResult, type RawReadings } from '#shared/engine'
import type { AcquisitionInput } from '#shared/schemas/acquisitions'
import { acquisitions, events, instruments, labs, peaks, results } from '../database/schema'
import type { LabKey } from './apiKeys'

export const RESULT_EVENT = 'result.created'

export function bodyHash(body: unknown): string {
  return createHash('sha256').update(JSON.stringify(body)).digest('hex')
}

/** What the API answers for one acquisition and its result. */
export function resultView(acq: typeof acquisitions.$inferSelect, res: typeof results.$inferSelect, instrumentSlug: string) {
  const summary = res.summary as unknown as EngineResult & { geometryVersion: number, calibrationVersion: number | null }
  return {
    id: acq.id,
    runId: acq.externalId,
    instrument: instrumentSlug,
    acquiredAt: acq.acquiredAt.toISOString(),
    sampleRef: acq.sampleRef,
    status: acq.status,
    receivedAt: acq.createdAt.toISOString(),
    result: {
      id: res.id,
      mode: summary.mode,
      points: summary.points,
      mzRange: [summary.mzMin, summary.mzMax] as [number, number],
      detectorUnit: summary.detectorUnit,
      baseline: summary.baseline,
      calibrated: summary.calibrated,
      peaks: summary.peaks,
      ratios: summary.ratios,
      qc: summary.qc,
      versions: { engine: res.engineVersion, constants: summary.constants, geometry: summary.geometryVersion, calibration: summary.calibrationVersion },
    },
  }
}
export type AcquisitionResultView = ReturnType<typeof resultView>

function readingsOf(input: AcquisitionInput): RawReadings {
  return { settings: input.settings, sweep: input.sweep, detectors: input.detectors }
}

/**
 * Accepts one acquisition for the key's lab: normalises it with the geometry and calibration
 * in force at `acquiredAt`, and stores the acquisition, its result, its peaks and the outbox
 * event in one transaction. The same run id with the same body answers the stored result;
 * with another body, 409.
 */
export async function acceptAcquisition(key: LabKey, input: AcquisitionInput, schemaId?: string): Promise<{ status: 200 | 201, body: AcquisitionResultView }> {
  const db = useDb()
  const hash = bodyHash(input)
  const instrument = await db.query.instruments.findFirst({ where: and(eq(instruments.labId, key.labId), eq(instruments.slug, input.instrument)) })
  if (!instrument) throw fieldProblem('instrument', 'no instrument with this slug in your lab')
  const existing = await findByRunId(key.labId, input.runId)
  if (existing) return replayOrConflict(existing, hash, instrument.slug)

  const acquiredAt = new Date(input.acquiredAt)
  const geo = await geometryAt(instrument.id, acquiredAt)
  if (!geo) throw fieldProblem('acquiredAt', 'is before the first geometry registered for this instrument')
  const calibration = await calibrationAt(instrument.id, acquiredAt)
  let engine: EngineResult
  try {
    const options = {
      tolerance: { ppm: input.processing?.tolerancePpm ?? 50 },
      formulas: input.processing?.formulas,
      isotopes: input.processing?.isotopes,
      maxCharge: input.processing?.maxCharge,
      ratios: input.processing?.ratios,
      calibration: calibration ? calibration.fit as { center: number, halfRange: number, coefficients: number[] } : null,
    }
    engine = input.mzSpectrum
      ? processMzSpectrum(input.mzSpectrum.mz, input.mzSpectrum.values, input.mzSpectrum.unit, options)
      : processReadings(geometrySchema.parse(geo.params), readingsOf(input), options)
  }
  catch (error) { engineProblem(error) }

  const summary = { ...engine, geometryVersion: geo.version, calibrationVersion: calibration?.version ?? null }
  try {
    return await db.transaction(async (tx) => {
      const acq = firstRow(await tx.insert(acquisitions).values({
        labId: key.labId, instrumentId: instrument.id, externalId: input.runId, acquiredAt, sampleRef: input.sampleRef ?? null,
        status: 'processed', bodyHash: hash, payload: input as unknown as Record<string, unknown>, pointCount: engine.points,
      }).returning())
      const res = firstRow(await tx.insert(results).values({
        acquisitionId: acq.id, labId: key.labId, geometryVersionId: geo.id, calibrationId: calibration?.id ?? null,
        engineVersion: engine.engineVersion, summary: summary as unknown as Record<string, unknown>,
      }).returning())
      if (engine.peaks.length) {
        await tx.insert(peaks).values(engine.peaks.map(p => ({ resultId: res.id, labId: key.labId, mz: p.centroid, area: p.area, species: p.assignment?.species ?? null, charge: p.assignment?.z ?? null })))
      }
      const view = resultView(acq, res, instrument.slug)
      // Events are numbered per lab; the row lock on the lab serialises the numbering. It is
      // taken last, so it is held only for the event's insert and the commit.
      const [{ sequence }] = await tx.update(labs).set({ eventSequence: sql`${labs.eventSequence} + 1` }).where(eq(labs.id, key.labId)).returning({ sequence: labs.eventSequence }) as [{ sequence: number }]
      await tx.insert(events).values({ labId: key.labId, sequence, type: RESULT_EVENT, payload: view as unknown as Record<string, unknown> })
      return { status: 201 as const, body: view }
    }).then((accepted) => {
      if (schemaId) countSchemaUse(schemaId, key.labId)
      return accepted
    })
  }
  catch (error) {
    // Two requests with one run id at once: the unique index lets one in; the other replays or conflicts.
    if ((error as { code?: string }).code === '23505') {
      const winner = await findByRunId(key.labId, input.runId)
      if (winner) return replayOrConflict(winner, hash, instrument.slug)
    }
    throw error
  }
}

async function findByRunId(labId: string, runId: string) {
  const [row] = await useDb().select({ acq: acquisitions, res: results }).from(acquisitions)
    .innerJoin(results, eq(results.acquisitionId, acquisitions.id))
    .where(and(eq(acquisitions.labId, labId), eq(acquisitions.externalId, runId))).limit(1)
  return row
}

function replayOrConflict(existing: { acq: typeof acquisitions.$inferSelect, res: typeof results.$inferSelect }, hash: string, slug: string) {
  if (existing.acq.bodyHash !== hash) throw fieldProblem('runId', 'this run id was accepted before with a different body', 409, 'run-id-conflict')
  return { status: 200 as const, body: resultView(existing.acq, existing.res, slug) }
}
