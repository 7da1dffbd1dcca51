import { z } from 'zod'
import { problemDocument } from './common'
import { reviewStates } from './lifecycle'

// The shapes of API answers: the OpenAPI document is generated from these, and the API
// tests check real responses against them.

const candidate = z.object({
  species: z.string(), kind: z.enum(['isotope', 'formula']), z: z.number().int(),
  mz: z.number(), neutralMass: z.number(), errorMz: z.number(), errorPpm: z.number(),
}).strict()

const notEstimated = (what: string) => z.number().nullable().describe(`${what}; null: not estimated (no converged fit, or a static reading with no profile)`)

export const resultPeak = z.object({
  collector: z.string(),
  centroid: z.number().describe('m/z (u per elementary charge): centre of a weighted least-squares Gaussian fit near the apex'),
  centroidU: z.number().describe('standard uncertainty of the centroid: the fit (noise) and the registered geometry in quadrature (GUM first order)'),
  centroidUFit: notEstimated('the fit\'s share of the centroid\'s standard uncertainty'),
  height: z.number().describe('fitted height above the baseline, in the detector unit (A or cps)'),
  heightU: notEstimated('standard uncertainty of the height, including the baseline level\'s'),
  area: z.number().describe('area above the baseline (signal · m/z) over ±4 fitted σ, divided by the Gaussian share of that window'),
  areaU: z.number().describe('standard uncertainty of the area: each point\'s noise through trapezoid weights shared by neighbours, Poisson variance for counts, and the baseline level\'s uncertainty'),
  fwhm: z.number().nullable().describe('full width at half maximum in m/z, from the fitted σ; null: not estimated (a static reading has no profile; results before engine 2.0.1 gave 0)'),
  fwhmU: notEstimated('standard uncertainty of the FWHM'),
  snr: z.number().describe('height over the noise σ (at the baseline; for counted data, at the apex)'),
  resolvingPower: z.number().nullable().describe('m/Δm with Δm the FWHM; null: not estimated (a static reading has no profile; results before engine 2.0.1 gave 0)'),
  resolvingPowerU: notEstimated('standard uncertainty of m/Δm (FWHM)'),
  resolvingPower10Valley: notEstimated('m/Δm in the 10 % valley definition: Δm the full width at 5 % of the height'),
  resolvingPower10ValleyU: notEstimated('standard uncertainty of the 10 % valley resolving power'),
  fitted: z.boolean().describe('false: no Gaussian fit converged; centroid and width read from the points, their uncertainties not estimated'),
  overlapping: z.boolean(),
  assignment: candidate.extend({
    impliedNeutralMass: z.number(),
    impliedNeutralMassU: z.number().describe('standard uncertainty of the implied neutral mass: z · u(m/z)'),
  }).nullable(),
  ambiguous: z.boolean().describe('another candidate line closer than the instrument resolves, whose expected signal is not below the noise: left unassigned'),
  candidates: z.array(candidate),
  linkedPeak: z.number().int().nullable().describe('index of the peak with the other charge state (z=1 ↔ z=2) of the same species'),
}).strict()

export const cycleStatistics = z.object({
  cycles: z.number().int(), used: z.number().int(), rejected: z.number().int(),
  rejectedCycles: z.array(z.number().int()).describe('0-based indices of the cycles set aside'),
  rule: z.string().describe('the outlier rule, named with its source'),
  sd: z.number().describe('standard deviation of the kept cycle ratios'),
  se: z.number().describe('standard error of their mean, s/√n (GUM 4.2.3): the Type A component of ratioU'),
  dof: z.number().int(),
  systematicU: z.number().describe('Type B component common to every cycle (block baselines, resistors, gain factors, dead times), propagated by sensitivity'),
  effectiveDof: z.number().describe('effective degrees of freedom of ratioU, Welch–Satterthwaite (GUM G.4.1)'),
}).strict()

export const ratioResult = z.object({
  id: z.string(), numerator: z.string(), denominator: z.string(), ratio: z.number(),
  ratioU: z.number().describe('standard uncertainty of the ratio, with the covariance of two areas that share one baseline'),
  standard: z.string(), deltaName: z.string(), deltaPermil: z.number(),
  deltaU: z.number().describe('standard uncertainty of δ from the measured ratio alone'),
  referenceRatio: z.number().describe('the standard\'s accepted ratio'),
  referenceRatioU: z.number().describe('its standard uncertainty as published'),
  referenceSource: z.string().describe('where the accepted ratio is published'),
  deltaUWithReference: z.number().describe('u(δ) with the accepted ratio\'s own uncertainty added'),
  cycles: cycleStatistics.optional().describe('static readings: the ratio is the mean of cycle ratios'),
  coverage: z.object({
    method: z.literal('GUM-S1 Monte Carlo (JCGM 101:2008)'),
    p: z.number().describe('coverage probability'),
    interval: z.tuple([z.number(), z.number()]).describe('probabilistically symmetric coverage interval of the ratio (JCGM 101 7.7.1)'),
    deltaInterval: z.tuple([z.number(), z.number()]).describe('the same interval as δ in ‰'),
    expandedU: z.number().describe('half the interval\'s width'),
    k: z.number().describe('coverage factor: expandedU over the standard deviation of the trials'),
    trials: z.number().int().describe('Monte Carlo trials (2·10^5, at least 10^4/(1 − p), JCGM 101 7.2.2)'),
  }).strict().optional().describe('asked for with processing.monteCarlo, for a ratio of two profile peaks: its coverage interval by GUM Supplement 1'),
}).strict()

const baselineSummary = z.object({
  mode: z.enum(['per-cycle', 'block', 'none']), level: z.number(), levelU: z.number(), readings: z.number().int(),
}).strict()

export const detectorReport = z.object({
  collector: z.string(),
  type: z.enum(['faraday', 'ion-counter', 'unregistered']),
  unit: z.enum(['A', 'cps']),
  corrections: z.array(z.string()).describe('what was done to the column, in order (I = V/R, gain factor, rate = counts / dwell, dead-time model)'),
  commonRelU: z.number().nullable().describe('relative standard uncertainty common to the column from the registered resistor and gain; null: no detector registered, not estimated'),
  baseline: baselineSummary.nullable(),
}).strict()

export const calibrationStatus = z.object({
  state: z.enum(['applied', 'retired', 'none', 'not-applicable']).describe('retired: the latest calibration was fitted under another geometry version and was not applied'),
  geometryVersion: z.number().int().nullable().describe('the geometry version the calibration was fitted under'),
  range: z.tuple([z.number(), z.number()]).nullable().describe('calibrated m/z span with its 2 % margin'),
  outside: z.array(z.number().int()).describe('indices of peaks outside that span (extrapolated, flagged)'),
  uncertaintyPropagated: z.boolean().describe('the fit\'s covariance reached the m/z uncertainties (fits from before engine 2 carry none)'),
}).strict()

export const qcFlag = z.object({ code: z.string(), message: z.string(), peak: z.number().int().optional() }).strict()

/**
 * Where a result stands in the lab's review (ISO/IEC 17025:2017 §7.8.1, authorisation before
 * reporting): every partner-facing result carries it (webhook data, feed entries, reads,
 * peaks), and the console shows it beside the review actions.
 */
export const resultReview = z.object({
  state: z.enum(reviewStates).describe('held: waiting for the lab\'s review; released: authorised; rejected: refused by a reviewer; retracted: released, then withdrawn by the lab (still readable, marked)'),
  releasedAt: z.iso.datetime({ offset: true }).nullable(),
  reviewedBy: z.string().nullable().describe('the reviewer\'s name; null when released automatically by the lab\'s rule (or not yet reviewed)'),
  version: z.number().int().describe('1 for the first result of an acquisition; a reprocessed result is the next version'),
  supersedes: z.uuid().nullable().describe('the result this version replaces; to partners, the version they were shown before (released or retracted), as correction.previousResultId names it'),
  correctionReason: z.string().nullable().describe('why this version corrects an earlier one'),
  retractionReason: z.string().nullable(),
  retractedAt: z.iso.datetime({ offset: true }).nullable(),
}).strict()
export type ResultReview = z.infer<typeof resultReview>

export const engineResultView = z.object({
  id: z.uuid(),
  mode: z.enum(['sweep', 'static']),
  points: z.number().int(),
  mzRange: z.tuple([z.number(), z.number()]),
  detectorUnit: z.enum(['A', 'cps']),
  baseline: z.object({
    level: z.number(), levelU: z.number().describe('standard uncertainty of the baseline level'), noise: z.number(),
    source: z.enum(['estimated', 'regions', 'zero']).describe('estimated from the points outside the peaks, the acquisition\'s baseline regions, or its on-peak-zero readings'),
    noiseModel: z.enum(['gaussian', 'poisson']), dwellS: z.number().nullable().describe('dwell time per point of counted data, from the count quantum'),
    points: z.number().int().describe('points the level was taken from'),
  }).strict().nullable(),
  calibrated: z.boolean(),
  calibration: calibrationStatus.nullable().describe('null for results of engine 1'),
  physics: z.object({ relativistic: z.boolean(), compatibility: z.enum(['1.x', '2.x']) }).strict(),
  detectors: z.array(detectorReport),
  cycles: z.object({ count: z.number().int(), rule: z.string() }).strict().nullable().describe('static readings: cycles and the outlier rule'),
  peaks: z.array(resultPeak),
  ratios: z.array(ratioResult),
  qc: z.array(qcFlag),
  matches: z.array(z.object({ id: z.string(), name: z.string(), similarity: z.number().describe('cosine similarity, 1 for the same pattern') }).strict())
    .describe('the reference spectra sent in processing.references, best first: cosine similarity of peak heights normalised to the tallest (areas grow with m/z in a field sweep), 0.5 m/z bins'),
  versions: z.object({
    engine: z.string(), constants: z.string(), geometry: z.number().int(), calibration: z.number().int().nullable(),
    method: z.number().int().nullable().describe('the method version applied; null: a single acquisition is processed without a method (methods apply to sequences)'),
  }).strict(),
  review: resultReview,
  caution: z.string().describe('the caution in short: results are only as good as what the lab registered, and decisions need the lab\'s own review'),
}).strict()

export const acquisitionView = z.object({
  id: z.uuid(),
  runId: z.string(),
  instrument: z.string(),
  acquiredAt: z.iso.datetime({ offset: true }),
  sampleRef: z.string().nullable(),
  status: z.enum(['processed', 'failed']),
  receivedAt: z.iso.datetime({ offset: true }),
  result: engineResultView,
}).strict()

/** The lab's own answer for one acquisition: the view and the request that posted it. */
export const labAcquisitionView = acquisitionView.extend({
  requestId: z.string().nullable().describe('the X-Request-Id of the request that posted it (the caller\'s, or the one the hub made); the hub\'s log lines about its processing and deliveries carry it as `reqId`. Null for acquisitions stored before the hub kept it, and for deferred uploads processed in the background'),
}).strict()

export const acquisitionListView = z.object({
  items: z.array(z.object({
    id: z.uuid(), runId: z.string(), instrument: z.string(), acquiredAt: z.iso.datetime({ offset: true }), sampleRef: z.string().nullable(),
    status: z.enum(['processed', 'failed']), points: z.number().int(), receivedAt: z.iso.datetime({ offset: true }),
    reviewState: z.enum(reviewStates).nullable().describe('the latest result version\'s review state'),
  }).strict()),
  nextCursor: z.string().nullable(),
}).strict()

/** What `result.retracted` carries: which result was withdrawn, when and why (it stays readable, marked). */
export const resultRetractedData = z.object({
  kind: z.literal('retraction'),
  resultId: z.uuid(), id: z.uuid().describe('the acquisition'), runId: z.string(), instrument: z.string(), version: z.number().int(),
  reason: z.string(), retractedAt: z.iso.datetime({ offset: true }),
  review: resultReview,
}).strict()

/** What `result.corrected` carries besides the new result: the version it replaces and why. */
export const resultCorrection = z.object({
  previousResultId: z.uuid(), previousVersion: z.number().int(), reason: z.string().nullable(),
}).strict()

export const resultReleasedData = acquisitionView
export const resultCorrectedData = acquisitionView.extend({ correction: resultCorrection })

export const eventFeedView = z.object({
  items: z.array(z.object({
    id: z.uuid(), type: z.string().describe('result.released, result.corrected, result.retracted or sequence.processed (result.created before the review lifecycle)'),
    lab: z.string(), sequence: z.number().int().describe('per-lab sequence number, for ordering'),
    createdAt: z.iso.datetime({ offset: true }),
    data: z.union([resultCorrectedData, acquisitionView, resultRetractedData, z.record(z.string(), z.unknown()).describe('sequence.processed: the sequence\'s outcome')]),
  }).strict()),
  nextCursor: z.string().describe('pass back as `cursor` to get what came after; unchanged when nothing new arrived'),
}).strict()

export const peakListView = z.object({
  items: z.array(z.object({
    id: z.number().int(), mz: z.number(), area: z.number(), species: z.string().nullable(), charge: z.number().int().nullable(),
    mzU: z.number().nullable().describe('standard uncertainty of the m/z (the result\'s centroidU)'),
    areaU: z.number().nullable().describe('standard uncertainty of the area'),
    lab: z.string(), acquisitionId: z.uuid(), resultId: z.uuid(), acquiredAt: z.iso.datetime({ offset: true }),
    calibrated: z.boolean(),
    versions: engineResultView.shape.versions,
    review: resultReview,
    caution: z.string(),
  }).strict()),
  nextCursor: z.string().nullable(),
}).strict()

export const tokenView = z.object({
  access_token: z.string(), token_type: z.literal('Bearer'), expires_in: z.number().int(), scope: z.string(),
}).strict()

export const exchangeSchemaList = z.object({
  items: z.array(z.object({
    id: z.uuid(), name: z.string(), version: z.number().int(), status: z.enum(['current', 'deprecated', 'retired']),
    deprecatedAt: z.iso.datetime({ offset: true }).nullable(), sunsetAt: z.iso.datetime({ offset: true }).nullable(),
  }).strict()),
}).strict()

export const uploadAccepted = z.object({
  id: z.uuid(), status: z.enum(['pending', 'processing', 'processed', 'failed']), statusUrl: z.string(), receivedAt: z.iso.datetime({ offset: true }),
}).strict()

export const uploadStatusView = z.object({
  id: z.uuid(), status: z.enum(['pending', 'processing', 'processed', 'failed']), receivedAt: z.iso.datetime({ offset: true }),
  finishedAt: z.iso.datetime({ offset: true }).nullable(), acquisitionUrl: z.string().nullable(), problem: problemDocument.nullable(),
}).strict()

/** A message the local SMTP fake kept (scripts/lib/mail-fake.ts), as the console's captured-mail page lists it. */
export const capturedMail = z.object({
  id: z.string(), receivedAt: z.iso.datetime({ offset: true }), from: z.string(), to: z.array(z.string()), subject: z.string(), text: z.string(), html: z.string(),
}).strict()
export type CapturedMail = z.infer<typeof capturedMail>

export const jwksView = z.object({ keys: z.array(z.record(z.string(), z.unknown())) })

export { problemDocument }
