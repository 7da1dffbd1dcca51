import { createHash, randomUUID } from 'node:crypto'
import { and, eq } from 'drizzle-orm'
import { geometry as geometrySchema, processMzSpectrum, processReadings, type AppliedCalibration, type EngineResult, type RawReadings } from '#shared/engine'
import type { AcquisitionInput } from '#shared/schemas/acquisitions'
import { acquisitionRuns, acquisitions, results } from '../../database/schema'
import type { LabKey } from '../access'
import { kickDeliveries } from '../delivery'
import { firstGeometryFrom, instrumentContextAt, type InstrumentContext } from '../instruments'
import { observeEngine } from '../metrics'
import { acquisitionHead, resultChoice, resultView, type AcquisitionHead, type AcquisitionResultView } from '../results'
import { countSchemaUse } from '../schemas'
import { storeEnabled, storePayload, type PayloadRef, type ReceivedBody } from '../store'
import { releasesAutomatically } from '#shared/releaseRule'
import { recordAccepted } from './acceptedWrites'

// The body is serialised once per request: the Idempotency-Key check, the run-id check and
// the stored payload all use the same text.
const canonicalBodies = new WeakMap<object, { json: string, hash: string }>()
export function canonicalBody(body: object) {
  let c = canonicalBodies.get(body)
  if (!c) {
    const json = JSON.stringify(body)
    c = { json, hash: createHash('sha256').update(json).digest('hex') }
    canonicalBodies.set(body, c)
  }
  return c
}

/** SHA-256 of the body's JSON text, to tell a replay from a different body. */
export function bodyHash(body: object): string {
  return canonicalBody(body).hash
}


function readingsOf(input: AcquisitionInput): RawReadings {
  return { settings: input.settings, sweep: input.sweep, detectors: input.detectors }
}

export interface AcceptOptions {
  /** The exchange-schema version the body was sent under, counted as a use. */
  schemaId?: string
  /**
   * A deferred upload being processed: its body is copied into the acquisition inside
   * PostgreSQL rather than serialised and sent again (10^6 points are about 20 MB of JSON),
   * and its hash is the one taken when the lab sent it.
   */
  upload?: { id: string, bodyHash: string }
  /** The console user who uploaded it (the four-eyes rule: they may not release it). */
  submittedBy?: string
  /** The request's bytes as received, for the object store (absent: the body's own JSON text). */
  received?: ReceivedBody
  /** Raw data already in the object store (a deferred upload stored it when it arrived). */
  stored?: PayloadRef
  /** The id of the request that sent it (event.context.requestId): kept, and logged with its deliveries. */
  requestId?: string
}

/**
 * The engine's result for an acquisition body under a geometry and calibration version: what
 * ingest stores, and what reprocessing (server/services/reprocessing) recomputes from a stored
 * payload under the versions in force now. A retired calibration (fitted under another
 * geometry version) was not applied, and the result does not cite it. Engine refusals leave as
 * problem documents naming the field. `measuredSpecies`: the instrument's registered list,
 * used when the acquisition names none.
 */
export function computeResult(input: AcquisitionInput, geo: NonNullable<InstrumentContext['geometry']>, calibration: InstrumentContext['calibration'], measuredSpecies: string[] | null = null) {
  let engine: EngineResult
  try {
    const options = {
      tolerance: { ppm: input.processing?.tolerancePpm ?? 50 },
      formulas: input.processing?.formulas,
      isotopes: input.processing?.isotopes,
      maxCharge: input.processing?.maxCharge,
      ratios: input.processing?.ratios,
      // The acquisition's own list, else the species its instrument is registered to measure.
      measuredSpecies: input.processing?.measuredSpecies ?? measuredSpecies ?? undefined,
      baseline: input.baseline,
      calibration: calibration ? { ...calibration.fit as unknown as AppliedCalibration, geometryVersion: calibration.geometryVersion } : null,
      geometryVersion: geo.version,
      compatibility: input.processing?.engine,
      monteCarlo: input.processing?.monteCarlo,
      references: input.processing?.references,
    }
    const started = performance.now()
    engine = input.mzSpectrum
      ? processMzSpectrum(input.mzSpectrum.mz, input.mzSpectrum.values, input.mzSpectrum.unit, options)
      : processReadings(geometrySchema.parse(geo.params), readingsOf(input), options)
    observeEngine(engine.mode, (performance.now() - started) / 1000)
  }
  catch (error) { engineProblem(error) }
  const applied = engine.calibration.state === 'applied' ? calibration : null
  const summary = { ...engine, geometryVersion: geo.version, calibrationVersion: applied?.version ?? null }
  return { engine, summary, applied }
}

/**
 * Accepts one acquisition for the key's lab: normalises it with the geometry and calibration
 * in force at `acquiredAt`, and stores the acquisition, its result, its peaks and the outbox
 * event in one transaction. The same run id with the same body answers the stored result;
 * with another body, 409.
 */
export async function acceptAcquisition(key: Pick<LabKey, 'labId'>, input: AcquisitionInput, opts: AcceptOptions = {}): Promise<{ status: 200 | 201, body: AcquisitionResultView }> {
  const hash = opts.upload?.bodyHash ?? bodyHash(input)
  const acquiredAt = new Date(input.acquiredAt)
  const instrument = await instrumentContextAt(key.labId, input.instrument, acquiredAt, input.runId)
  if (!instrument) throw fieldProblem('instrument', 'no instrument with this slug in your lab')
  if (instrument.runSeen) {
    const existing = await findByRunId(key.labId, input.runId)
    if (existing) return replayOrConflict(existing, hash, instrument.slug)
  }
  const geo = instrument.geometry
  if (!geo) throw await predatesGeometry(instrument, acquiredAt)
  const { engine, summary, applied } = computeResult(input, geo, instrument.calibration, instrument.measuredSpecies)
  const acq: AcquisitionHead = {
    id: randomUUID(), labId: key.labId, instrumentId: instrument.id, externalId: input.runId, acquiredAt, sampleRef: input.sampleRef ?? null,
    status: 'processed', bodyHash: hash, pointCount: engine.points, submittedBy: opts.submittedBy ?? null, requestId: opts.requestId ?? null, createdAt: new Date(),
    // Where its raw data is kept is the write's business (payload below); the view does not show it.
    rawSha256: null, rawBytes: null, rawContentType: null, arraysSha256: null, arraysBytes: null, rawRemovedAt: null,
  }
  // Held for the lab's review unless its rule releases it now (written in the same statement).
  const released = releasesAutomatically(instrument.release.policy, instrument.release.allows, engine.qc.map(f => f.code))
  const res: typeof results.$inferSelect = {
    id: randomUUID(), acquisitionId: acq.id, acquisitionCreatedAt: acq.createdAt, labId: key.labId, geometryVersionId: geo.id, calibrationId: applied?.id ?? null,
    engineVersion: engine.engineVersion, summary: summary as unknown as Record<string, unknown>, createdAt: acq.createdAt,
    version: 1, supersedes: null, supersededBy: null, correctionReason: null, reprocessJobId: null,
    reviewState: released ? 'released' : 'held', reviewedBy: null, reviewedAt: released ? acq.createdAt : null, reviewComment: null,
    releasedAt: released ? acq.createdAt : null, retractedBy: null, retractedAt: null, retractionReason: null,
  }
  const view = resultView(acq, res, instrument.slug)
  // Raw data goes to the object store before the row commits (a store failure answers 503 and
  // nothing is written); with the store off it goes into the row as JSON, as before issue 23.
  const payload = opts.stored ? { ref: opts.stored }
    : storeEnabled() ? { ref: await storePayload(input, opts.received) }
      : opts.upload ? { uploadId: opts.upload.id } : { json: canonicalBody(input).json }
  try {
    await recordAccepted({ acq, res, payload, peaks: engine.peaks, view })
    useLog().info({ reqId: acq.requestId, acquisitionId: acq.id, resultId: res.id, labId: acq.labId, runId: acq.externalId, released }, 'acquisition accepted')
    if (opts.schemaId) countSchemaUse(opts.schemaId, key.labId)
    kickDeliveries()
    return { status: 201, body: view }
  }
  catch (error) {
    // Two requests with one run id at once: the unique index lets one in; the other replays or conflicts.
    if (pgErrorCode(error) === '23505') {
      const winner = await findByRunId(key.labId, input.runId)
      if (winner) return replayOrConflict(winner, hash, instrument.slug)
    }
    throw error
  }
}

async function findByRunId(labId: string, runId: string) {
  // acquisition_runs holds a lab's run ids across months (acquisitions are partitioned by month).
  const [row] = await useDb().select({ acq: acquisitionHead, res: results }).from(acquisitionRuns)
    .innerJoin(acquisitions, and(eq(acquisitions.id, acquisitionRuns.acquisitionId), eq(acquisitions.createdAt, acquisitionRuns.acquisitionCreatedAt)))
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt), resultChoice('latest')))
    .where(and(eq(acquisitionRuns.labId, labId), eq(acquisitionRuns.externalId, runId))).limit(1)
  return row
}

function replayOrConflict(existing: { acq: AcquisitionHead, res: typeof results.$inferSelect }, hash: string, slug: string) {
  if (existing.acq.bodyHash !== hash) throw fieldProblem('runId', 'this run id was accepted before with a different body', 409, 'run-id-conflict')
  return { status: 200 as const, body: resultView(existing.acq, existing.res, slug) }
}

/**
 * An acquisition uploaded as a file in the console by a lab manager or admin: processed at
 * once, whatever its size (the console waits for it), and recorded in the audit log.
 */
export async function uploadFromConsole(audit: AuditContext, labId: string, input: AcquisitionInput, received?: ReceivedBody, requestId?: string) {
  const result = await acceptAcquisition({ labId }, input, { submittedBy: audit.actor.id ?? undefined, received, requestId })
  if (result.status === 201) {
    await recordAudit(useDb(), { ...audit, action: 'acquisition.uploaded', targetType: 'acquisition', targetId: result.body.id, detail: { labId, runId: input.runId, points: result.body.result.points } })
  }
  return result
}

/**
 * The refusal of a run acquired before the instrument's first geometry, saying what to do: the
 * geometry a lab registers is valid from a time it chooses (now, when left empty), and runs
 * from before it cannot be converted to m/z.
 */
async function predatesGeometry(instrument: { id: string, slug: string }, acquiredAt: Date) {
  const first = await firstGeometryFrom(instrument.id)
  const from = first ? ` (valid from ${first.toISOString()})` : ''
  return fieldProblem('acquiredAt', `${acquiredAt.toISOString()} is before the first geometry of ${instrument.slug}${from}. To process older runs, register a geometry version valid from ${acquiredAt.toISOString().slice(0, 10)} or earlier on the instrument's page in the console (Instruments, ${instrument.slug}, Register a new geometry version), then send the run again.`)
}
