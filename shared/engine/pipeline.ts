import { assignPeak, CandidateTable, linkChargeStates, type Candidate, type Tolerance } from './assign'
import { applyCalibrationColumn, type CalibrationFit } from './calibrate'
import { CODATA_EDITION, ENGINE_VERSION } from './constants'
import { EngineError, assertFiniteColumn } from './errors'
import { rankMatches, type ReferenceSpectrum } from './fingerprint'
import { staticCollectorMz, sweepToMz, type Geometry, type RawReadings } from './geometry'
import { ratioAndDelta, referenceRatios, type RatioResult, type ReferenceRatioId } from './ratios'
import { findPeaks, sweepDirection, type Baseline, type Peak } from './spectrum'
import { formulaSpecies, naturalIsotopes, neutralMassFromMz, type Species } from './species'
import { detectorQuantity, siFactor } from './units'

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
  calibration?: Pick<CalibrationFit, 'center' | 'halfRange' | 'coefficients'> | null
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

export interface EngineResult {
  engineVersion: string
  constants: string
  mode: 'sweep' | 'static'
  points: number
  mzMin: number
  mzMax: number
  detectorUnit: 'A' | 'cps'
  baseline: Baseline | null
  calibrated: boolean
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

function detectorSI(d: { unit: string, values: ArrayLike<number> }, field: string): { values: Float64Array, unit: 'A' | 'cps' } {
  const quantity = detectorQuantity(d.unit, `${field}.unit`)
  const factor = siFactor(quantity, d.unit, `${field}.unit`)
  assertFiniteColumn(`${field}.values`, d.values)
  const values = new Float64Array(d.values.length)
  for (let i = 0; i < values.length; i++) values[i] = (d.values[i] as number) * factor
  return { values, unit: quantity === 'current' ? 'A' : 'cps' }
}

/** Raw readings to peaks, assignments, ratios and QC flags: the whole engine in one call. */
export function processReadings(geo: Geometry, readings: RawReadings, options: EngineOptions = {}): EngineResult {
  if (!readings.detectors?.length) throw new EngineError('detectors', 'missing', 'at least one detector column is required')
  const table = candidateTable(options)
  const tolerance = options.tolerance ?? DEFAULT_TOLERANCE
  return readings.sweep ? processSweep(geo, readings, options, table, tolerance) : processStatic(geo, readings, options, table, tolerance)
}

function processSweep(geo: Geometry, readings: RawReadings, options: EngineOptions, table: CandidateTable, tolerance: Tolerance): EngineResult {
  const n = readings.sweep!.values.length
  const columns: Column[] = []
  let detectorUnit: 'A' | 'cps' = 'A'
  readings.detectors.forEach((d, k) => {
    const field = `detectors[${k}]`
    if (d.values.length !== n) throw new EngineError(`${field}.values`, 'length-mismatch', `has ${d.values.length} points, the sweep has ${n}`)
    const { values, unit } = detectorSI(d, field)
    detectorUnit = unit
    let radius: { value: number, u: number } | undefined
    let collector = d.collector ?? 'main'
    if (geo.kind === 'multi-collector') {
      const c = d.collector ? geo.collectors.find(x => x.id === d.collector) : geo.collectors[0]
      if (!c) throw new EngineError(`${field}.collector`, 'unknown', `no collector "${d.collector}" in this instrument's geometry`)
      radius = { value: c.effectiveRadius.value * siFactor('length', c.effectiveRadius.unit, 'geometry'), u: c.effectiveRadius.u * siFactor('length', c.effectiveRadius.unit, 'geometry') }
      collector = c.id
    }
    const conv = sweepToMz(geo, readings, radius)
    if (options.calibration) applyCalibrationColumn(options.calibration, conv.mz)
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
  return finish(peaks, options, { mode: 'sweep', points: n, mzMin, mzMax, detectorUnit, baseline })
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
  return finish(peaks, { ...options, calibration: null }, { mode: 'sweep', points: mz.length, mzMin: mz[0]!, mzMax: mz[mz.length - 1]!, detectorUnit, baseline: found.baseline }, { externalMz: true })
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

function processStatic(geo: Geometry, readings: RawReadings, options: EngineOptions, table: CandidateTable, tolerance: Tolerance): EngineResult {
  const positions = staticCollectorMz(geo, readings)
  let detectorUnit: 'A' | 'cps' = 'A'
  const peaks: ResultPeak[] = readings.detectors.map((d, k) => {
    const field = `detectors[${k}]`
    const pos = d.collector ? positions.find(p => p.collector === d.collector) : positions[k]
    if (!pos) throw new EngineError(`${field}.collector`, 'unknown', `no collector "${d.collector ?? k}" in this instrument's geometry`)
    if (d.values.length < 1) throw new EngineError(`${field}.values`, 'too-short', 'needs at least one reading')
    const { values, unit } = detectorSI(d, field)
    detectorUnit = unit
    let mean = 0
    for (const v of values) mean += v
    mean /= values.length
    let ss = 0
    for (const v of values) ss += (v - mean) ** 2
    // Standard uncertainty of the mean of repeated readings (GUM 4.2.3).
    const u = values.length > 1 ? Math.sqrt(ss / (values.length - 1) / values.length) : 0
    let mz = pos.mz
    if (options.calibration) mz = applyCalibrationColumn(options.calibration, new Float64Array([mz]))[0]!
    // A collector's width is not known from one reading: ambiguity uses the tolerance window.
    const window = Math.max(tolerance.abs ?? 0, mz * (tolerance.ppm ?? 0) * 1e-6)
    const a = assignPeak(table, mz, window, tolerance)
    return {
      collector: pos.collector, centroid: mz, centroidU: mz * pos.relU, height: mean, area: mean, areaU: u,
      fwhm: 0, snr: u > 0 ? mean / u : Number.MAX_VALUE, resolvingPower: 0, overlapping: false, ...assignmentFields(a, mz),
    }
  })
  const mzs = peaks.map(p => p.centroid)
  return finish(peaks, options, { mode: 'static', points: readings.detectors[0]!.values.length, mzMin: Math.min(...mzs), mzMax: Math.max(...mzs), detectorUnit, baseline: null })
}

function finish(peaks: ResultPeak[], options: EngineOptions, head: Pick<EngineResult, 'mode' | 'points' | 'mzMin' | 'mzMax' | 'detectorUnit' | 'baseline'>, source: { externalMz?: boolean } = {}): EngineResult {
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
  else if (!options.calibration) qc.push({ code: 'uncalibrated', message: 'No calibration applied: m/z comes from the registered geometry alone.' })

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
    ratios.push(ratioAndDelta(request.id, perLogMz(heavy), perLogMz(light)))
  }
  const matches = options.references?.length ? rankMatches(peaks.map(p => ({ mz: p.centroid, intensity: Math.max(0, p.area) })), options.references) : []
  return { engineVersion: ENGINE_VERSION, constants: CODATA_EDITION, ...head, calibrated: !!options.calibration, peaks, ratios, qc, matches }
}
