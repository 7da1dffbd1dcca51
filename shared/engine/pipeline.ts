import { assignPeak, CandidateTable, expectedSignal, linkChargeStates, type Assignment, type Candidate, type ObservedLine, type Tolerance } from './assign'
import { applyCalibrationColumn, CALIBRATION_MARGIN, calibratedRange, calibrationU, type AppliedCalibration } from './calibrate'
import { ENGINE_VERSION, physicsFor, type Physics } from './constants'
import { detectorParams, detectorSignal, type DetectorParams, type DetectorSpec } from './detectors'
import { EngineError, assertFiniteColumn } from './errors'
import { rankMatches, type ReferenceSpectrum } from './fingerprint'
import { staticCollectorMz, sweepToMz, type Geometry, type RawReadings } from './geometry'
import { ratioAndDelta, referenceRatios, type RatioCoverage, type RatioResult, type ReferenceRatioId } from './ratios'
import { REJECTION_RULE, staticColumn, staticRatio, type BaselineSummary, type StaticColumnInput } from './static'
import { findPeaks, sweepDirection, type Baseline, type BaselineInput, type Peak } from './spectrum'
import { formulaSpecies, naturalIsotopes, neutralMassFromMz, type Species } from './species'
import { monteCarloCoverage } from './uncertainty'
import { siFactor } from './units'

// The chain from raw readings to a result: sweeps, static collectors and m/z spectra share
// the resolved options, the candidate table and the finishing step (assignment, calibration
// status, QC), so it is one file of over 300 lines, read top to bottom; the steps themselves
// live in their own modules (spectrum, static, assign, calibrate).

export interface EngineOptions {
  tolerance?: Tolerance
  maxCharge?: number
  /** Registered molecular and fragment ions, as formulas ("CO2", "[13C]O2", "N2"). */
  formulas?: string[]
  /**
   * Include the natural isotopes of the element table as candidates. By default they are
   * included only when no formulas are registered: a lab that names its species does not
   * want every multiply charged isotope line near them flagged as a rival.
   */
  isotopes?: boolean
  calibration?: AppliedCalibration | null
  /**
   * The geometry version the readings are converted with: a calibration fitted under another
   * version is retired and not applied (a QC flag says so).
   */
  geometryVersion?: number
  /**
   * '2.x' (default): CODATA 2022 and the relativistic momentum. '1.x': CODATA 2018 and the
   * non-relativistic relations of engine 1.0.0, to reproduce its results.
   */
  compatibility?: '1.x' | '2.x'
  /** Ratios to report: a reference ratio and the species whose peaks carry it. */
  ratios?: { id: ReferenceRatioId, heavy?: string, light?: string }[]
  minSnr?: number
  references?: ReferenceSpectrum[]
  /**
   * The species this instrument measures (labels, or element symbols for all of an
   * element's isotopes): candidates outside the list are not considered.
   */
  measuredSpecies?: string[]
  /**
   * Baseline regions (m/z) or on-peak-zero readings per detector column (in the column's
   * unit, matched by collector; a single entry without collector serves every column).
   */
  baseline?: { regions?: { mzFrom: number, mzTo: number }[], zero?: { collector?: string, unit: string, values: ArrayLike<number> }[] }
  /** Dwell time per point (s) of counted data; otherwise found from the count quantum. */
  dwellS?: number
  /**
   * Also give each ratio of two profile peaks its 95 % coverage interval by GUM Supplement 1
   * Monte Carlo (JCGM 101:2008, 2·10^5 trials a ratio, tens of ms: so on request only).
   */
  monteCarlo?: boolean
}

/**
 * A peak as a result reports it: the profile fit's own figures (`Peak`, see spectrum.ts), the
 * centroid's uncertainty combined with the geometry's, and the assignment.
 */
export type ResultPeak = Pick<Peak, 'centroid' | 'height' | 'heightU' | 'area' | 'areaU' | 'fwhmU' | 'snr'
  | 'resolvingPowerU' | 'resolvingPower10ValleyU' | 'fitted' | 'overlapping'> & {
  collector: string
  /** null: not estimated (a static reading has no profile). */
  fwhm: Peak['fwhm'] | null
  /** m/Δm (FWHM); null: not estimated (a static reading has no profile). */
  resolvingPower: Peak['resolvingPower'] | null
  /** Combined standard uncertainty: the fit's (noise) and the geometry's, in quadrature. */
  centroidU: number
  /** The fit's share alone (`Peak.centroidU`; null: not estimated, the fit failed). */
  centroidUFit: Peak['centroidU']
  /** null: not estimated (a static reading has no profile). */
  resolvingPower10Valley: Peak['resolvingPower10Valley'] | null
  assignment: (Candidate & { impliedNeutralMass: number, impliedNeutralMassU: number }) | null
  ambiguous: boolean
  candidates: Candidate[]
  /** Index of the peak holding the other charge state (z=1 <-> z=2) of the same species. */
  linkedPeak: number | null
}

export interface QcFlag { code: string, message: string, peak?: number }

/** How each detector column was turned into a signal. */
export interface DetectorReport {
  collector: string
  type: 'faraday' | 'ion-counter' | 'unregistered'
  unit: 'A' | 'cps'
  corrections: string[]
  /** Relative standard uncertainty common to the column (resistor, gain); null: not estimated. */
  commonRelU: number | null
  baseline: BaselineSummary | null
}

/** The calibration as applied: or why not. */
export interface CalibrationStatus {
  state: 'applied' | 'retired' | 'none' | 'not-applicable'
  geometryVersion: number | null
  /** Measured m/z span the fit covers, with its margin, when applied. */
  range: [number, number] | null
  /** Peaks outside that span (extrapolated). */
  outside: number[]
  /** Whether the fit's covariance reached the m/z uncertainties (fits before engine 2 carry none). */
  uncertaintyPropagated: boolean
}

export interface EngineResult {
  engineVersion: string
  constants: string
  /** The conversion's physics: relativistic momentum or not, and the compatibility mode. */
  physics: { relativistic: boolean, compatibility: '1.x' | '2.x' }
  mode: 'sweep' | 'static'
  points: number
  mzMin: number
  mzMax: number
  detectorUnit: 'A' | 'cps'
  baseline: Baseline | null
  calibrated: boolean
  calibration: CalibrationStatus
  detectors: DetectorReport[]
  /** Static readings: the cycle count and the outlier rule their ratios use. */
  cycles: { count: number, rule: string } | null
  peaks: ResultPeak[]
  ratios: RatioResult[]
  qc: QcFlag[]
  matches: { id: string, name: string, similarity: number }[]
}

const DEFAULT_TOLERANCE: Tolerance = { ppm: 50 }

let isotopeCache: Species[] | undefined
function candidateSpecies(options: EngineOptions): Species[] {
  const list: Species[] = []
  if (options.isotopes ?? !options.formulas?.length) list.push(...(isotopeCache ??= naturalIsotopes()))
  options.formulas?.forEach((f, i) => list.push(formulaSpecies(f, `formulas[${i}]`)))
  return list
}

// Candidate tables are rebuilt only when the candidate set changes (the 16 latest sets kept).
// The set is compared field by field with copies of the lists: a JSON key per call was about
// 0.5 µs (DEVELOPERS.md, Measured).
interface TableEntry { isotopes: boolean, formulas: string[], maxCharge: number, measured: string[], table: CandidateTable }
const tableCache: TableEntry[] = []
const sameList = (a: readonly string[], b: readonly string[]) => a.length === b.length && a.every((x, i) => x === b[i])
function candidateTable(options: EngineOptions): CandidateTable {
  const isotopes = options.isotopes ?? !options.formulas?.length
  const formulas = options.formulas ?? []
  const maxCharge = options.maxCharge ?? 3
  const measured = options.measuredSpecies ?? []
  for (const e of tableCache) {
    if (e.isotopes === isotopes && e.maxCharge === maxCharge && sameList(e.formulas, formulas) && sameList(e.measured, measured)) return e.table
  }
  const table = new CandidateTable(candidateSpecies(options), maxCharge, options.measuredSpecies)
  if (tableCache.length >= 16) tableCache.pop()
  tableCache.unshift({ isotopes, formulas: [...formulas], maxCharge, measured: [...measured], table })
  return table
}

/** One sweep's m/z column, oriented to rise; the matching detector columns follow it. */
interface Column { collector: string, mz: Float64Array, signal: Float64Array, relU: (mz: number) => number }

/** The detector registered for a collector in the geometry (single-collector kinds: `detector`). */
export function collectorDetector(geo: Geometry, collector: string | undefined): DetectorSpec | undefined {
  if (geo.kind === 'multi-collector') return (collector ? geo.collectors.find(c => c.id === collector) : geo.collectors[0])?.detector
  return geo.detector
}

function detectorSI(d: { unit: string, values: ArrayLike<number>, dwell?: { value: number, unit: string } }, field: string, params: DetectorParams = detectorParams(undefined, field), reports?: DetectorReport[], collector = 'main'): { values: Float64Array, unit: 'A' | 'cps' } {
  assertFiniteColumn(`${field}.values`, d.values)
  const signal = detectorSignal(params, d, field)
  reports?.push({ collector, type: params.type, unit: signal.unit, corrections: signal.corrections, commonRelU: params.type === 'unregistered' ? null : signal.commonRelU, baseline: null })
  return { values: signal.values, unit: signal.unit }
}

/** The calibration a call applies: the fit in force, or null with the reason. */
interface CalibrationInForce { fit: AppliedCalibration | null, state: CalibrationStatus['state'], fittedUnder: number | null }

/** The calibration to apply, or null with the reason when the geometry version moved on. */
function calibrationInForce(options: EngineOptions): CalibrationInForce {
  const fit = options.calibration
  if (!fit) return { fit: null, state: 'none', fittedUnder: null }
  const fittedUnder = fit.geometryVersion ?? null
  if (options.geometryVersion !== undefined && fittedUnder !== null && fittedUnder !== options.geometryVersion) return { fit: null, state: 'retired', fittedUnder }
  return { fit, state: 'applied', fittedUnder }
}

/** Raw readings to peaks, assignments, ratios and QC flags: the whole engine in one call. */
export function processReadings(geo: Geometry, readings: RawReadings, options: EngineOptions = {}): EngineResult {
  if (!readings.detectors?.length) throw new EngineError('detectors', 'missing', 'at least one detector column is required')
  const table = candidateTable(options)
  const tolerance = options.tolerance ?? DEFAULT_TOLERANCE
  // The resolved calibration travels beside the caller's options, not merged into a copy of
  // them: an object spread followed by new keys cost about 3 µs a call in Node 20 (DEVELOPERS.md, Measured).
  const cal = calibrationInForce(options)
  return readings.sweep ? processSweep(geo, readings, options, cal, table, tolerance) : processStatic(geo, readings, options, cal, table, tolerance)
}

function processSweep(geo: Geometry, readings: RawReadings, options: EngineOptions, cal: CalibrationInForce, table: CandidateTable, tolerance: Tolerance): EngineResult {
  const n = readings.sweep!.values.length
  const columns: Column[] = []
  const reports: DetectorReport[] = []
  const physics = physicsFor(options.compatibility)
  let detectorUnit: 'A' | 'cps' = 'A'
  readings.detectors.forEach((d, k) => {
    const field = `detectors[${k}]`
    if (d.values.length !== n) throw new EngineError(`${field}.values`, 'length-mismatch', `has ${d.values.length} points, the sweep has ${n}`)
    const { values, unit } = detectorSI(d, field, detectorParams(collectorDetector(geo, d.collector), `geometry.detector`), reports, d.collector ?? 'main')
    detectorUnit = unit
    let radius: { value: number, u: number } | undefined
    let collector = d.collector ?? 'main'
    if (geo.kind === 'multi-collector') {
      const c = d.collector ? geo.collectors.find(x => x.id === d.collector) : geo.collectors[0]
      if (!c) throw new EngineError(`${field}.collector`, 'unknown', `no collector "${d.collector}" in this instrument's geometry`)
      radius = { value: c.effectiveRadius.value * siFactor('length', c.effectiveRadius.unit, 'geometry'), u: c.effectiveRadius.u * siFactor('length', c.effectiveRadius.unit, 'geometry') }
      collector = c.id
    }
    const conv = sweepToMz(geo, readings, radius, physics)
    if (cal.fit) {
      applyCalibrationColumn(cal.fit, conv.mz)
      conv.relU = calibratedRelU(cal.fit, conv.relU)
    }
    if (sweepDirection(conv.mz) < 0) { conv.mz.reverse(); values.reverse() }
    columns.push({ collector, mz: conv.mz, signal: values, relU: conv.relU })
  })

  const peaks: ResultPeak[] = []
  const assignments: Assignment[] = []
  const shared: SharedBaseline[] = []
  let guessed = false
  let baseline: Baseline | null = null
  let mzMin = Infinity
  let mzMax = -Infinity
  columns.forEach((col, c) => {
    mzMin = Math.min(mzMin, col.mz[0]!)
    mzMax = Math.max(mzMax, col.mz[col.mz.length - 1]!)
    const found = findPeaks(col.mz, col.signal, { minSnr: options.minSnr, counting: detectorUnit === 'cps', dwellS: options.dwellS, input: baselineInput(options, col.collector, c, columns.length, detectorUnit) })
    baseline ??= found.baseline
    for (const p of found.peaks) {
      const a = assignPeak(table, p.centroid, p.fwhm, tolerance, p.centroidU ?? 0)
      assignments.push(a)
      peaks.push(profilePeak(p, a, col.collector, p.centroid * col.relU(p.centroid)))
      shared.push({ column: c, areaPerBaseline: p.areaPerBaseline, levelVariance: found.baseline.levelU ** 2, noise: found.baseline.noise, windowFraction: p.windowFraction })
      guessed ||= found.baseline.source === 'estimated' && found.baseline.points < 2
    }
  })
  return finish(peaks, options, cal, { mode: 'sweep', points: n, mzMin, mzMax, detectorUnit, baseline, detectors: reports, cycles: null }, { baselineGuessed: guessed }, shared, assignments)
}

/** What peaks of one column share through its baseline: for correlations and detection limits. */
interface SharedBaseline { column: number, areaPerBaseline: number, levelVariance: number, noise: number, windowFraction?: number }

/** The acquisition's baseline regions, and the zero readings of this column in SI. */
function baselineInput(options: EngineOptions, collector: string, index: number, columns: number, unit: 'A' | 'cps'): BaselineInput | undefined {
  const b = options.baseline
  if (!b) return undefined
  const zeros = b.zero ?? []
  const k = zeros.findIndex(z => z.collector === collector)
  const zIndex = k >= 0 ? k : (zeros.length === 1 && !zeros[0]!.collector) || (zeros.length === columns && !zeros[index]?.collector) ? (zeros.length === 1 ? 0 : index) : -1
  let zero: Float64Array | undefined
  if (zIndex >= 0) {
    const z = detectorSI(zeros[zIndex]!, `baseline.zero[${zIndex}]`)
    if (z.unit !== unit) throw new EngineError(`baseline.zero[${zIndex}].unit`, 'unit-mismatch', `the detector column reads ${unit === 'A' ? 'a current' : 'a count rate'}; give its zero readings in a unit of the same kind`)
    zero = z.values
  }
  return { regions: b.regions, zero }
}

/**
 * Once calibrated against reference peaks measured under the same geometry and settings, the
 * geometry's registered uncertainties cancel between reference and sample: the m/z
 * uncertainty is the correction's, √(gᵀCg). The fit's x is the uncalibrated m/z; it is
 * evaluated at the calibrated m/z, which differs by the correction (ppm), a negligible change
 * of u. A stored fit without a covariance (engine 1) keeps the geometry's uncertainty.
 */
function calibratedRelU(fit: AppliedCalibration, geometryRelU: (mz: number) => number): (mz: number) => number {
  if (!fit.covariance) return geometryRelU
  return mz => calibrationU(fit, mz)! / mz
}

/**
 * A spectrum that arrives in m/z already (computed by the instrument's software, as mzML
 * carries it): peaks, assignment and ratios only; the registered geometry is not applied.
 */
export function processMzSpectrum(mzValues: ArrayLike<number>, signalValues: ArrayLike<number>, unit: string, options: EngineOptions = {}): EngineResult {
  assertFiniteColumn('mzSpectrum.mz', mzValues)
  const { values: signal, unit: detectorUnit } = detectorSI({ unit, values: signalValues }, 'mzSpectrum')
  if (mzValues.length !== signal.length) throw new EngineError('mzSpectrum.values', 'length-mismatch', `has ${signal.length} points, mz has ${mzValues.length}`)
  const mz = Float64Array.from(mzValues)
  if (sweepDirection(mz, 'mzSpectrum.mz') < 0) { mz.reverse(); signal.reverse() }
  const table = candidateTable(options)
  const tolerance = options.tolerance ?? DEFAULT_TOLERANCE
  const found = findPeaks(mz, signal, { minSnr: options.minSnr, counting: detectorUnit === 'cps', dwellS: options.dwellS, input: baselineInput(options, 'main', 0, 1, detectorUnit) })
  // The geometry is not applied, so there is no geometry uncertainty to give the centroid.
  const assignments = found.peaks.map(p => assignPeak(table, p.centroid, p.fwhm, tolerance, p.centroidU ?? 0))
  const peaks = found.peaks.map((p, i) => profilePeak(p, assignments[i]!, 'main', 0))
  const shared = found.peaks.map(p => ({ column: 0, areaPerBaseline: p.areaPerBaseline, levelVariance: found.baseline.levelU ** 2, noise: found.baseline.noise, windowFraction: p.windowFraction }))
  return finish(peaks, options, { fit: null, state: 'not-applicable', fittedUnder: null }, { mode: 'sweep', points: mz.length, mzMin: mz[0]!, mzMax: mz[mz.length - 1]!, detectorUnit, baseline: found.baseline, detectors: [], cycles: null }, { externalMz: true, baselineGuessed: found.baseline.source === 'estimated' && found.baseline.points < 2 }, shared, assignments)
}

/** A profile peak with its assignment `a` (kept by the caller until its rivals are weighed), as the result reports it. */
function profilePeak(p: Peak, a: Assignment, collector: string, geometryU: number): ResultPeak {
  const centroidU = Math.hypot(geometryU, p.centroidU ?? 0)
  const f = assignmentFields(a, p.centroid, centroidU)
  return {
    collector, centroid: p.centroid, centroidU, centroidUFit: p.centroidU, height: p.height, heightU: p.heightU, area: p.area, areaU: p.areaU,
    fwhm: p.fwhm, fwhmU: p.fwhmU, snr: p.snr, resolvingPower: p.resolvingPower, resolvingPowerU: p.resolvingPowerU,
    resolvingPower10Valley: p.resolvingPower10Valley, resolvingPower10ValleyU: p.resolvingPower10ValleyU, fitted: p.fitted,
    overlapping: p.overlapping, assignment: f.assignment, ambiguous: f.ambiguous, candidates: f.candidates, linkedPeak: f.linkedPeak,
  }
}

// Objects here are written out key by key rather than spread: in Node 20 a spread followed
// by new keys cost about 3 µs each (a fresh hidden class each time), a spread after other
// keys about 0.2 µs; together a third of a 1,000-point spectrum's cost (DEVELOPERS.md, Measured).
function assignmentFields(a: Assignment, mz: number, mzU: number): Pick<ResultPeak, 'assignment' | 'ambiguous' | 'candidates' | 'linkedPeak'> {
  const b = a.best
  return {
    // Neutral mass z·(m/z) + z·m_e: its u is z·u(m/z) (m_e's own u is 10^-10 of it).
    assignment: b
      ? { species: b.species, kind: b.kind, z: b.z, mz: b.mz, neutralMass: b.neutralMass, errorMz: b.errorMz, errorPpm: b.errorPpm, impliedNeutralMass: neutralMassFromMz(mz, b.z), impliedNeutralMassU: b.z * mzU }
      : null,
    ambiguous: a.ambiguous, candidates: a.candidates.slice(0, 5), linkedPeak: null,
  }
}

/**
 * Rivals weighed by expected signal: a rival line whose expected signal, from the co-isotopes
 * this spectrum shows, is below the noise cannot be what was measured, so it does not make
 * the peak ambiguous.
 */
function weighRivals(peaks: ResultPeak[], assignments: Assignment[], shared: SharedBaseline[], sweep: { mzMin: number, mzMax: number }, minSnr: number) {
  if (!peaks.some(p => p.ambiguous)) return
  const observed: (ObservedLine & { peak: number })[] = []
  peaks.forEach((p, i) => {
    const a = assignments[i]
    if (a?.first) observed.push({ species: a.first.species, z: a.first.z, height: p.height, peak: i })
  })
  peaks.forEach((p, i) => {
    const a = assignments[i]
    if (!a?.first || !a.rivals?.length) return
    const noise = shared[i]?.noise ?? 0
    const others = observed.filter(o => o.peak !== i)
    const bounds = { mzMin: sweep.mzMin, mzMax: sweep.mzMax, detectionLimit: minSnr * noise }
    const rivals = a.rivals.filter(r => expectedSignal(r, others, bounds) >= noise)
    if (rivals.length) return
    // The dismissed rivals leave the candidate list by species and charge: the list holds
    // copies of the rivals whose m/z differs from the first's (errors taken from the peak).
    const dismissed = a.rivals
    const settled: Assignment = { ...a, best: a.first, ambiguous: false, candidates: a.candidates.filter(c => !dismissed.some(r => r.species === c.species && r.z === c.z)) }
    Object.assign(p, assignmentFields(settled, p.centroid, p.centroidU))
  })
}

/** A static reading: each collector's cycles through its detector and baseline, ratios cycle by cycle. */
function processStatic(geo: Geometry, readings: RawReadings, options: EngineOptions, cal: CalibrationInForce, table: CandidateTable, tolerance: Tolerance): EngineResult {
  const positions = staticCollectorMz(geo, readings, physicsFor(options.compatibility))
  let detectorUnit: 'A' | 'cps' = 'A'
  const reports: DetectorReport[] = []
  const inputs: { p: DetectorParams, column: StaticColumnInput, field: string }[] = []
  const peaks: ResultPeak[] = readings.detectors.map((d, k) => {
    const field = `detectors[${k}]`
    const pos = d.collector ? positions.find(p => p.collector === d.collector) : positions[k]
    if (!pos) throw new EngineError(`${field}.collector`, 'unknown', `no collector "${d.collector ?? k}" in this instrument's geometry`)
    if (d.values.length < 1) throw new EngineError(`${field}.values`, 'too-short', 'needs at least one reading')
    assertFiniteColumn(`${field}.values`, d.values)
    const p = detectorParams(collectorDetector(geo, pos.collector === 'main' ? undefined : pos.collector), `geometry.detector`)
    const column = d as StaticColumnInput
    const col = staticColumn(p, column, field)
    inputs.push({ p, column, field })
    detectorUnit = col.unit
    reports.push({ collector: pos.collector, type: p.type, unit: col.unit, corrections: col.corrections, commonRelU: p.type === 'unregistered' ? null : Math.hypot(p.resistorU / (p.resistorOhm || 1), p.gainU / p.gain), baseline: col.baseline })
    let mz = pos.mz
    let centroidU = mz * pos.relU
    if (cal.fit) {
      mz = applyCalibrationColumn(cal.fit, new Float64Array([mz]))[0]!
      centroidU = mz * calibratedRelU(cal.fit, () => pos.relU)(mz)
    }
    // A collector's width is not known from one reading: ambiguity uses the tolerance window.
    const window = Math.max(tolerance.abs ?? 0, mz * (tolerance.ppm ?? 0) * 1e-6)
    const a = assignPeak(table, mz, window, tolerance)
    const f = assignmentFields(a, mz, centroidU)
    // A static reading has no profile: width, resolving power and a centroid fit are not estimated.
    return {
      collector: pos.collector, centroid: mz, centroidU, centroidUFit: null, height: col.mean, heightU: col.meanU, area: col.mean, areaU: col.meanU,
      fwhm: null, fwhmU: null, snr: col.meanU > 0 ? col.mean / col.meanU : Number.MAX_VALUE, resolvingPower: null, resolvingPowerU: null,
      resolvingPower10Valley: null, resolvingPower10ValleyU: null, fitted: false, overlapping: false,
      assignment: f.assignment, ambiguous: f.ambiguous, candidates: f.candidates, linkedPeak: f.linkedPeak,
    }
  })
  const mzs = peaks.map(p => p.centroid)
  const cycleRatio = (heavy: number, light: number) => staticRatio(inputs[heavy]!, inputs[light]!)
  return finish(peaks, options, cal, {
    mode: 'static', points: readings.detectors[0]!.values.length, mzMin: Math.min(...mzs), mzMax: Math.max(...mzs), detectorUnit, baseline: null,
    detectors: reports, cycles: { count: readings.detectors[0]!.values.length, rule: REJECTION_RULE },
  }, {}, [], [], cycleRatio)
}

function finish(
  peaks: ResultPeak[], options: EngineOptions, cal: CalibrationInForce, head: Pick<EngineResult, 'mode' | 'points' | 'mzMin' | 'mzMax' | 'detectorUnit' | 'baseline' | 'detectors' | 'cycles'>,
  source: { externalMz?: boolean, baselineGuessed?: boolean } = {}, shared: SharedBaseline[] = [], assignments: Assignment[] = [], cycleRatio?: (heavy: number, light: number) => ReturnType<typeof staticRatio>,
): EngineResult {
  if (head.mode === 'sweep') weighRivals(peaks, assignments, shared, head, options.minSnr ?? 10)
  for (const [i, j] of linkChargeStates(peaks.map(p => (p.assignment ? { candidates: [], ambiguous: false, best: p.assignment } : null)))) {
    peaks[i]!.linkedPeak = j
    peaks[j]!.linkedPeak = i
  }
  const qc: QcFlag[] = []
  if (!peaks.length) qc.push({ code: 'no-peaks', message: 'No peak stands above the noise.' })
  peaks.forEach((p, i) => {
    if (p.ambiguous) qc.push({ code: 'ambiguous', peak: i, message: `Peak at m/z ${p.centroid.toFixed(4)} matches ${p.candidates.length} candidates closer together than this instrument resolves.` })
    else if (!p.assignment) qc.push({ code: 'unassigned', peak: i, message: `Peak at m/z ${p.centroid.toFixed(4)} matches no candidate within tolerance.` })
    if (p.overlapping) qc.push({ code: 'overlapping', peak: i, message: `Peak at m/z ${p.centroid.toFixed(4)} overlaps a neighbour; its area is shared.` })
    if (head.mode === 'sweep' && p.snr < 20) qc.push({ code: 'low-signal', peak: i, message: `Peak at m/z ${p.centroid.toFixed(4)} has S/N ${p.snr.toFixed(1)} (< 20).` })
    if (head.mode === 'sweep' && !p.fitted) qc.push({ code: 'fit-failed', peak: i, message: `Peak at m/z ${p.centroid.toFixed(4)}: no Gaussian fit converged; centroid, height and width are read from the points and their uncertainties are not estimated.` })
  })
  if (source.baselineGuessed) qc.push({ code: 'baseline-guessed', message: 'No point of the sweep lies clear of the peaks, so the baseline level is a guess from the lowest points and areas may be off by more than their u; send baseline regions or on-peak-zero readings.' })
  shared.forEach((sh, i) => {
    if (sh.windowFraction !== undefined && sh.windowFraction < 0.99) qc.push({ code: 'area-window-cut', peak: i, message: `Peak at m/z ${peaks[i]!.centroid.toFixed(4)}: the sweep's end or a neighbour cuts its area window; ${((1 - sh.windowFraction) * 100).toFixed(1)} % of the fitted shape lies outside and is added from the fit.` })
  })
  if (source.externalMz) qc.push({ code: 'external-mz', message: 'm/z was computed by the instrument\'s own software; the registered geometry and calibration were not applied.' })
  else if (cal.state === 'retired') qc.push({ code: 'calibration-retired', message: `The latest calibration was fitted under geometry version ${cal.fittedUnder}, not version ${options.geometryVersion} now in force: it is retired and was not applied, so m/z comes from the registered geometry alone.` })
  else if (!cal.fit) qc.push({ code: 'uncalibrated', message: 'No calibration applied: m/z comes from the registered geometry alone.' })
  const calibration = calibrationStatus(cal, peaks)
  for (const i of calibration.outside) {
    qc.push({ code: 'outside-calibration', peak: i, message: `Peak at m/z ${peaks[i]!.centroid.toFixed(4)} lies outside the calibrated range m/z ${calibration.range![0].toFixed(3)}–${calibration.range![1].toFixed(3)} (reference span + ${CALIBRATION_MARGIN * 100} %): extrapolated.` })
  }
  for (const d of head.detectors) {
    if (d.unit === 'cps' && d.type === 'unregistered') qc.push({ code: 'dead-time-not-corrected', message: `Collector ${d.collector} counts ions but has no ion counter registered: no dead-time correction.` })
  }

  const ratios: RatioResult[] = []
  for (const request of options.ratios ?? []) {
    const ref = referenceRatios[request.id]
    const heavyLabel = request.heavy ?? ref.heavy
    const lightLabel = request.light ?? ref.light
    const find = (label: string) => peaks.find(p => p.assignment?.species === label && p.assignment.z === 1)
    const heavy = find(heavyLabel)
    const light = find(lightLabel)
    if (!heavy || !light) {
      qc.push({ code: 'ratio-missing', message: `${ref.delta} needs assigned peaks of ${heavyLabel} and ${lightLabel}.` })
      continue
    }
    // At constant resolving power a peak's width in m/z grows with m/z, so areas are taken
    // over ln(m/z) (area / m/z), which is proportional to each species' ion current.
    const perLogMz = (p: ResultPeak) => (head.mode === 'sweep' ? { area: p.area / p.centroid, areaU: p.areaU / p.centroid } : p)
    if (cycleRatio) {
      const r = cycleRatio(peaks.indexOf(heavy), peaks.indexOf(light))
      ratios.push({ ...ratioAndDelta(request.id, { area: r.ratio, areaU: r.u }, { area: 1, areaU: 0 }), cycles: r.stats })
      if (r.stats.rejected) qc.push({ code: 'cycles-rejected', message: `${ref.delta}: ${r.stats.rejected} of ${r.stats.cycles} cycles set aside by ${r.stats.rule}.` })
      continue
    }
    // Peaks of one column share its baseline level: cov(A_h, A_l) = (∂A_h/∂L)(∂A_l/∂L) u²(L)
    // (GUM JCGM 100:2008, 5.2.2); the centroids' relative u (10^-5) is left out.
    const hi = peaks.indexOf(heavy)
    const li = peaks.indexOf(light)
    const sh = shared[hi]
    const sl = shared[li]
    const covariance = head.mode === 'sweep' && sh && sl && sh.column === sl.column ? sh.areaPerBaseline * sl.areaPerBaseline * sh.levelVariance / (heavy.centroid * light.centroid) : 0
    const ratio = ratioAndDelta(request.id, perLogMz(heavy), perLogMz(light), covariance)
    if (options.monteCarlo) {
      // The shared baseline level moves both areas: its share s = (∂A/∂L)·u(L)/(m/z) is one
      // common input, the rest of each area's u an independent one (cov = s_h·s_l, as above).
      const common = (s: SharedBaseline | undefined, p: ResultPeak) => (covariance !== 0 && s ? s.areaPerBaseline * Math.sqrt(s.levelVariance) / p.centroid : 0)
      ratio.coverage = ratioCoverage(perLogMz(heavy), perLogMz(light), common(sh, heavy), common(sl, light), ratio)
    }
    ratios.push(ratio)
  }
  // Fingerprints compare heights (normalised to the tallest peak): areas of a field sweep grow
  // with m/z at constant resolving power, heights do not.
  const tallest = Math.max(0, ...peaks.map(p => p.height))
  const matches = options.references?.length ? rankMatches(peaks.map(p => ({ mz: p.centroid, intensity: tallest > 0 ? Math.max(0, p.height) / tallest : 0 })), options.references) : []
  const physics: Physics = physicsFor(options.compatibility)
  return {
    engineVersion: ENGINE_VERSION, constants: physics.constants.name, physics: { relativistic: physics.relativistic, compatibility: physics.compatibility },
    ...head, calibrated: !!cal.fit, calibration, peaks, ratios, qc, matches,
  }
}

function calibrationStatus(cal: CalibrationInForce, peaks: ResultPeak[]): CalibrationStatus {
  const fit = cal.fit
  if (!fit) return { state: cal.state === 'applied' ? 'none' : cal.state, geometryVersion: cal.fittedUnder ?? null, range: null, outside: [], uncertaintyPropagated: false }
  const { from, to } = calibratedRange(fit)
  const outside: number[] = []
  peaks.forEach((p, i) => { if (p.centroid < from || p.centroid > to) outside.push(i) })
  return { state: 'applied', geometryVersion: fit.geometryVersion ?? null, range: [from, to], outside, uncertaintyPropagated: !!fit.covariance }
}

/** M ≥ 10^4/(1 − p) for p = 0.95 (JCGM 101:2008 7.2.2, from memory): fixed, so a result's cost is known. */
const RATIO_TRIALS = 200_000

/**
 * GUM-S1 (JCGM 101:2008) 95 % coverage interval of R = (h + s_h·z)/(l + s_l·z): h and l the
 * areas' independent parts, z ~ N(0, 1) the shared baseline's deviation in units of its u.
 */
function ratioCoverage(heavy: { area: number, areaU: number }, light: { area: number, areaU: number }, sHeavy: number, sLight: number, r: RatioResult): RatioCoverage {
  const own = (a: { areaU: number }, s: number) => Math.sqrt(Math.max(0, a.areaU ** 2 - s ** 2))
  const mc = monteCarloCoverage(x => (x[0]! + sHeavy * x[2]!) / (x[1]! + sLight * x[2]!), [
    { value: heavy.area, u: own(heavy, sHeavy) }, { value: light.area, u: own(light, sLight) }, { value: 0, u: 1 },
  ], { trials: RATIO_TRIALS })
  const delta = (ratio: number) => (ratio / r.referenceRatio - 1) * 1000
  return {
    method: 'GUM-S1 Monte Carlo (JCGM 101:2008)', p: mc.p, interval: mc.interval, deltaInterval: [delta(mc.interval[0]), delta(mc.interval[1])],
    expandedU: mc.expandedU, k: mc.k, trials: mc.trials,
  }
}
