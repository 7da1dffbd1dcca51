import { assignPeak, CandidateTable, linkChargeStates, type Candidate, type Tolerance } from './assign'
import { applyCalibrationColumn, CALIBRATION_MARGIN, calibratedRange, calibrationU, type AppliedCalibration } from './calibrate'
import { ENGINE_VERSION, physicsFor, type Physics } from './constants'
import { detectorParams, detectorSignal, type DetectorParams, type DetectorSpec } from './detectors'
import { EngineError, assertFiniteColumn } from './errors'
import { rankMatches, type ReferenceSpectrum } from './fingerprint'
import { staticCollectorMz, sweepToMz, type Geometry, type RawReadings } from './geometry'
import { ratioAndDelta, referenceRatios, type RatioResult, type ReferenceRatioId } from './ratios'
import { REJECTION_RULE, staticColumn, staticRatio, type BaselineSummary, type StaticColumnInput } from './static'
import { findPeaks, sweepDirection, type Baseline, type Peak } from './spectrum'
import { formulaSpecies, naturalIsotopes, neutralMassFromMz, type Species } from './species'
import { siFactor } from './units'

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
}

export interface ResultPeak {
  collector: string
  centroid: number
  centroidU: number
  height: number
  area: number
  areaU: number
  fwhm: number
  snr: number
  resolvingPower: number
  overlapping: boolean
  assignment: (Candidate & { impliedNeutralMass: number }) | null
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

// Candidate tables are rebuilt only when the candidate set changes (a few recent sets kept).
const tableCache = new Map<string, CandidateTable>()
function candidateTable(options: EngineOptions): CandidateTable {
  const key = JSON.stringify([options.isotopes ?? !options.formulas?.length, options.formulas ?? [], options.maxCharge ?? 3])
  let table = tableCache.get(key)
  if (!table) {
    table = new CandidateTable(candidateSpecies(options), options.maxCharge ?? 3)
    if (tableCache.size >= 16) tableCache.delete(tableCache.keys().next().value!)
    tableCache.set(key, table)
  }
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

/** The calibration to apply, or null with the reason when the geometry version moved on. */
function calibrationInForce(options: EngineOptions): { fit: AppliedCalibration | null, state: CalibrationStatus['state'], fittedUnder: number | null } {
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
  const { fit, state, fittedUnder } = calibrationInForce(options)
  const opts = { ...options, calibration: fit, calibrationState: state, calibrationFittedUnder: fittedUnder }
  return readings.sweep ? processSweep(geo, readings, opts, table, tolerance) : processStatic(geo, readings, opts, table, tolerance)
}

type ResolvedOptions = EngineOptions & { calibrationState: CalibrationStatus['state'], calibrationFittedUnder?: number | null }

function processSweep(geo: Geometry, readings: RawReadings, options: ResolvedOptions, table: CandidateTable, tolerance: Tolerance): EngineResult {
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
    if (options.calibration) {
      applyCalibrationColumn(options.calibration, conv.mz)
      conv.relU = calibratedRelU(options.calibration, conv.relU)
    }
    if (sweepDirection(conv.mz) < 0) { conv.mz.reverse(); values.reverse() }
    columns.push({ collector, mz: conv.mz, signal: values, relU: conv.relU })
  })

  const peaks: ResultPeak[] = []
  let baseline: Baseline | null = null
  let mzMin = Infinity
  let mzMax = -Infinity
  for (const col of columns) {
    mzMin = Math.min(mzMin, col.mz[0]!)
    mzMax = Math.max(mzMax, col.mz[col.mz.length - 1]!)
    const found = findPeaks(col.mz, col.signal, { minSnr: options.minSnr })
    baseline ??= found.baseline
    for (const p of found.peaks) peaks.push(profilePeak(p, col.collector, p.centroid * col.relU(p.centroid), table, tolerance))
  }
  return finish(peaks, options, { mode: 'sweep', points: n, mzMin, mzMax, detectorUnit, baseline, detectors: reports, cycles: null })
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
  const found = findPeaks(mz, signal, { minSnr: options.minSnr })
  // The geometry is not applied, so there is no geometry uncertainty to give the centroid.
  const peaks = found.peaks.map(p => profilePeak(p, 'main', 0, table, tolerance))
  return finish(peaks, { ...options, calibration: null, calibrationState: 'not-applicable' }, { mode: 'sweep', points: mz.length, mzMin: mz[0]!, mzMax: mz[mz.length - 1]!, detectorUnit, baseline: found.baseline, detectors: [], cycles: null }, { externalMz: true })
}

/** A profile peak with its assignment, as the result reports it. */
function profilePeak(p: Peak, collector: string, centroidU: number, table: CandidateTable, tolerance: Tolerance): ResultPeak {
  const a = assignPeak(table, p.centroid, p.fwhm, tolerance)
  return {
    collector, centroid: p.centroid, centroidU, height: p.height, area: p.area, areaU: p.areaU, fwhm: p.fwhm, snr: p.snr,
    resolvingPower: p.resolvingPower, overlapping: p.overlapping, ...assignmentFields(a, p.centroid),
  }
}

function assignmentFields(a: ReturnType<typeof assignPeak>, mz: number) {
  return {
    assignment: a.best ? { ...a.best, impliedNeutralMass: neutralMassFromMz(mz, a.best.z) } : null,
    ambiguous: a.ambiguous, candidates: a.candidates.slice(0, 5), linkedPeak: null,
  }
}

/** A static reading: each collector's cycles through its detector and baseline, ratios cycle by cycle. */
function processStatic(geo: Geometry, readings: RawReadings, options: ResolvedOptions, table: CandidateTable, tolerance: Tolerance): EngineResult {
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
    if (options.calibration) {
      mz = applyCalibrationColumn(options.calibration, new Float64Array([mz]))[0]!
      centroidU = mz * calibratedRelU(options.calibration, () => pos.relU)(mz)
    }
    // A collector's width is not known from one reading: ambiguity uses the tolerance window.
    const window = Math.max(tolerance.abs ?? 0, mz * (tolerance.ppm ?? 0) * 1e-6)
    const a = assignPeak(table, mz, window, tolerance)
    return {
      collector: pos.collector, centroid: mz, centroidU, height: col.mean, area: col.mean, areaU: col.meanU,
      fwhm: 0, snr: col.meanU > 0 ? col.mean / col.meanU : Number.MAX_VALUE, resolvingPower: 0, overlapping: false, ...assignmentFields(a, mz),
    }
  })
  const mzs = peaks.map(p => p.centroid)
  const cycleRatio = (heavy: number, light: number) => staticRatio(inputs[heavy]!, inputs[light]!)
  return finish(peaks, options, {
    mode: 'static', points: readings.detectors[0]!.values.length, mzMin: Math.min(...mzs), mzMax: Math.max(...mzs), detectorUnit, baseline: null,
    detectors: reports, cycles: { count: readings.detectors[0]!.values.length, rule: REJECTION_RULE },
  }, {}, cycleRatio)
}

function finish(
  peaks: ResultPeak[], options: ResolvedOptions, head: Pick<EngineResult, 'mode' | 'points' | 'mzMin' | 'mzMax' | 'detectorUnit' | 'baseline' | 'detectors' | 'cycles'>,
  source: { externalMz?: boolean } = {}, cycleRatio?: (heavy: number, light: number) => ReturnType<typeof staticRatio>,
): EngineResult {
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
  })
  if (source.externalMz) qc.push({ code: 'external-mz', message: 'm/z was computed by the instrument\'s own software; the registered geometry and calibration were not applied.' })
  else if (options.calibrationState === 'retired') qc.push({ code: 'calibration-retired', message: `The latest calibration was fitted under geometry version ${options.calibrationFittedUnder}, not version ${options.geometryVersion} now in force: it is retired and was not applied, so m/z comes from the registered geometry alone.` })
  else if (!options.calibration) qc.push({ code: 'uncalibrated', message: 'No calibration applied: m/z comes from the registered geometry alone.' })
  const calibration = calibrationStatus(options, peaks)
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
    ratios.push(ratioAndDelta(request.id, perLogMz(heavy), perLogMz(light)))
  }
  const matches = options.references?.length ? rankMatches(peaks.map(p => ({ mz: p.centroid, intensity: Math.max(0, p.area) })), options.references) : []
  const physics: Physics = physicsFor(options.compatibility)
  return {
    engineVersion: ENGINE_VERSION, constants: physics.constants.name, physics: { relativistic: physics.relativistic, compatibility: physics.compatibility },
    ...head, calibrated: !!options.calibration, calibration, peaks, ratios, qc, matches,
  }
}

function calibrationStatus(options: ResolvedOptions, peaks: ResultPeak[]): CalibrationStatus {
  const fit = options.calibration
  if (!fit) return { state: options.calibrationState === 'applied' ? 'none' : options.calibrationState, geometryVersion: options.calibrationFittedUnder ?? null, range: null, outside: [], uncertaintyPropagated: false }
  const { from, to } = calibratedRange(fit)
  const outside: number[] = []
  peaks.forEach((p, i) => { if (p.centroid < from || p.centroid > to) outside.push(i) })
  return { state: 'applied', geometryVersion: fit.geometryVersion ?? null, range: [from, to], outside, uncertaintyPropagated: !!fit.covariance }
}
