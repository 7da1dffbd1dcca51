import { getTableColumns } from 'drizzle-orm'
import type { EngineResult } from '#shared/engine'
import { CAUTION_SHORT } from '#shared/caution'
import type { ResultReview } from '#shared/schemas/responses'
import { acquisitions, type results } from '../../database/schema'

/**
 * An acquisition's columns without its payload: the payload can be tens of megabytes, and
 * nothing that answers with a result needs it.
 */
const { payload: _payload, ...acquisitionHead } = getTableColumns(acquisitions)
export { acquisitionHead }
export type AcquisitionHead = Omit<typeof acquisitions.$inferSelect, 'payload'>

type ResultRow = typeof results.$inferSelect

/**
 * Where a result stands in the lab's review; `reviewer` is the releasing user's name (null:
 * automatic, or not reviewed). `supersedes`, when given, replaces the immediate predecessor:
 * partners are told of the version they were shown before (`previousPublished`), never of a
 * held or rejected one they never saw.
 */
export function reviewOf(res: ResultRow, reviewer: string | null = null, supersedes?: string | null): ResultReview {
  return {
    state: res.reviewState,
    releasedAt: res.releasedAt?.toISOString() ?? null,
    reviewedBy: res.reviewState === 'held' ? null : reviewer,
    version: res.version,
    supersedes: supersedes === undefined ? res.supersedes : supersedes,
    correctionReason: res.correctionReason,
    retractionReason: res.retractionReason,
    retractedAt: res.retractedAt?.toISOString() ?? null,
  }
}

/** What the API answers for one acquisition and its result (`supersedes`: see reviewOf). */
export function resultView(acq: AcquisitionHead, res: ResultRow, instrumentSlug: string, reviewer: string | null = null, supersedes?: string | null) {
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
      // Results of engine 1 carry none of these: say so rather than invent them.
      calibration: summary.calibration ?? null,
      physics: summary.physics ?? { relativistic: false, compatibility: '1.x' as const },
      detectors: summary.detectors ?? [],
      cycles: summary.cycles ?? null,
      peaks: summary.peaks,
      ratios: summary.ratios,
      qc: summary.qc,
      matches: summary.matches ?? [],
      versions: { engine: res.engineVersion, constants: summary.constants, geometry: summary.geometryVersion, calibration: summary.calibrationVersion, method: null },
      review: reviewOf(res, reviewer, supersedes),
      caution: CAUTION_SHORT,
    },
  }
}
export type AcquisitionResultView = ReturnType<typeof resultView>
