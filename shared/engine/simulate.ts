import { kgPerCToUPerE, PHYSICS_2X, type Physics } from './constants'
import { EngineError } from './errors'
import { fieldForMz, type Geometry, type RawReadings } from './geometry'
import { seededNormal, seededPoisson } from './random'
import { ionMz, type Species } from './species'
import { measuredSI } from './units'

// The forward model: what an instrument would report for given species. A field sweep
// across an m/z window, Gaussian peaks of FWHM m/R in m/z, a detector current with baseline
// and normal noise. Used by the demo, the lab simulator and the round-trip tests.

export interface SimulatedSpecies { species: Species, z?: number, /** Peak height in A. */ currentA: number }

export interface SimulationInput {
  geometry: Geometry
  /** Fixed readings: acceleratingVoltage (potential sector) or plateVoltage and filterField (Wien). */
  acceleratingVoltageV?: number
  plateVoltageV?: number
  filterFieldT?: number
  mzFrom: number
  mzTo: number
  points: number
  resolvingPower: number
  species: SimulatedSpecies[]
  baselineA?: number
  noiseA?: number
  seed?: number
  /** Unit the field column is written in (default T). */
  fieldUnit?: 'T' | 'mT' | 'G' | 'kG'
  /** Unit the detector column is written in (default fA). */
  currentUnit?: 'A' | 'pA' | 'fA' | 'nA'
  /**
   * An ion counter instead of a Faraday cup: `currentA` and `baselineA` are read as count
   * rates (cps), each point's count is a Poisson deviate of rate × dwell, and the column is
   * written in cps (noiseA is ignored: counting is the noise).
   */
  counting?: { dwellS: number }
  /** The physics the truth is simulated with (default engine 2.x: CODATA 2022, relativistic). */
  physics?: Physics
}

const FWHM_TO_SIGMA = 1 / (2 * Math.sqrt(2 * Math.LN2))
const fieldUnits = { T: 1, mT: 1e-3, G: 1e-4, kG: 1e-1 }
const currentUnits = { A: 1, nA: 1e-9, pA: 1e-12, fA: 1e-15 }

/**
 * The analyzer field (T) that puts m/z on the axis, and its inverse, for a geometry and its
 * fixed readings. The potential sector uses the engine's own relation (geometry.ts
 * fieldForMz: relativistic unless 1.x physics is asked for), so the simulated truth and the
 * engine agree to rounding; a copy without the relativistic term put 4He+ at 10 kV 1.3 ppm
 * off its true m/z.
 */
function axisFor(input: SimulationInput): { field: (mz: number) => number, mz: (field: number) => number } {
  const geo = input.geometry
  const physics = input.physics ?? PHYSICS_2X
  if (geo.kind === 'wien-sector') {
    const r = measuredSI('length', geo.analyzerRadius, 'geometry.analyzerRadius').value
    const d = measuredSI('length', geo.plateGap, 'geometry.plateGap').value
    // v = V/(d B_f) and m/z = r B / (γ v) · K (geometry.ts, Jackson 1999 §12.1), so
    // B = m/z · γ v / (r K); engine 1.x physics has γ = 1. A copy without γ put the demo's
    // helium lines (v = 4e6 m/s) 89 ppm off their true m/z.
    const v = input.plateVoltageV! / (d * input.filterFieldT!)
    const invGamma = physics.relativistic ? Math.sqrt(1 - (v / physics.constants.speedOfLightMps) ** 2) : 1
    const perT = r * invGamma / v * kgPerCToUPerE(physics.constants)
    return { field: mz => mz / perT, mz: b => b * perT }
  }
  const r = geo.kind === 'potential-sector'
    ? measuredSI('length', geo.analyzerRadius, 'geometry.analyzerRadius').value
    : measuredSI('length', geo.collectors[0]!.effectiveRadius, 'geometry.collectors').value
  const u = input.acceleratingVoltageV!
  const rel = physics.relativistic ? (u / physics.constants.speedOfLightMps) ** 2 : 0
  // (rB)² = 2U·(m/q) + (U/c)², m/q in kg/C, times K for u/e.
  return { field: mz => fieldForMz(mz, r, u, physics), mz: b => ((r * b) ** 2 - rel) / (2 * u) * kgPerCToUPerE(physics.constants) }
}

export function simulateFieldSweep(input: SimulationInput): RawReadings {
  if (input.points < 2) throw new EngineError('points', 'too-short', 'a sweep needs at least 2 points')
  if (!(input.mzTo > input.mzFrom && input.mzFrom > 0)) throw new EngineError('mzTo', 'bad-range', 'mzTo must exceed mzFrom > 0')
  const geo = input.geometry
  if (geo.kind === 'wien-sector' ? !(input.plateVoltageV! > 0 && input.filterFieldT! > 0) : !(input.acceleratingVoltageV! > 0)) {
    throw new EngineError('settings', 'missing', 'the fixed readings of this geometry are required')
  }
  const n = input.points
  const fieldUnit = input.fieldUnit ?? 'T'
  const currentUnit = input.currentUnit ?? 'fA'
  const axis = axisFor(input)
  const b0 = axis.field(input.mzFrom)
  const b1 = axis.field(input.mzTo)
  const field = new Float64Array(n)
  const mz = new Float64Array(n)
  // The field is stepped evenly, as a sweeping magnet supply would.
  for (let i = 0; i < n; i++) {
    const b = b0 + (b1 - b0) * i / (n - 1)
    field[i] = b / fieldUnits[fieldUnit]
    mz[i] = axis.mz(b)
  }
  const current = new Float64Array(n).fill(input.baselineA ?? 0)
  for (const s of input.species) {
    const centre = ionMz(s.species.mass, s.z ?? 1)
    const sigma = centre / input.resolvingPower * FWHM_TO_SIGMA
    // Only the points within 8σ of the centre are touched.
    let lo = lowerBound(mz, centre - 8 * sigma)
    const hi = lowerBound(mz, centre + 8 * sigma)
    for (; lo < hi; lo++) current[lo]! += s.currentA * Math.exp(-0.5 * ((mz[lo]! - centre) / sigma) ** 2)
  }
  const detector = new Float64Array(n)
  if (input.counting) {
    const dwell = input.counting.dwellS
    if (!(dwell > 0)) throw new EngineError('counting.dwellS', 'not-positive', 'the dwell time must be greater than zero')
    const poisson = seededPoisson(input.seed ?? 1)
    for (let i = 0; i < n; i++) detector[i] = poisson(Math.max(0, current[i]!) * dwell) / dwell
  }
  else {
    const noise = input.noiseA ?? 0
    const normal = seededNormal(input.seed ?? 1)
    for (let i = 0; i < n; i++) detector[i] = (current[i]! + noise * normal()) / currentUnits[currentUnit]
  }
  const settings: RawReadings['settings'] = geo.kind === 'wien-sector'
    ? { plateVoltage: { value: input.plateVoltageV!, unit: 'V' }, filterField: { value: input.filterFieldT!, unit: 'T' } }
    : { acceleratingVoltage: { value: input.acceleratingVoltageV!, unit: 'V' } }
  return { settings, sweep: { reading: 'field', values: field, unit: fieldUnit }, detectors: [{ values: detector, unit: input.counting ? 'cps' : currentUnit }] }
}

function lowerBound(a: Float64Array, x: number): number {
  let lo = 0
  let hi = a.length
  while (lo < hi) { const mid = (lo + hi) >> 1; if (a[mid]! < x) lo = mid + 1; else hi = mid }
  return lo
}
