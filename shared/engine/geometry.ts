import { z } from 'zod'
import { kgPerCToUPerE, PHYSICS_2X, type Physics } from './constants'
import { detectorSpec } from './detectors'
import { EngineError, assertPositive } from './errors'
import { measured, measuredSI, siFactor, type Measured } from './units'

// The instrument geometries Arcwise knows, each with its registered parameters and their
// standard uncertainties. Relations (DESIGN.md, "Physics"), exact in special relativity
// (Jackson, Classical Electrodynamics, 3rd ed., Wiley 1999, §12.1: p = γmv, E_kin = (γ−1)mc²,
// and the Lorentz force q(E + v×B) holds at any speed):
//  - accelerating-potential sector: E_kin = qU, so (pc)² = (qU)² + 2qU·mc², and r = p/(qB)
//      =>  m/q = (rB)² / (2U) − U / (2c²)     (the second term is the relativistic correction)
//  - Wien filter before the sector: qE = qvB_f, so v = E/B_f = V/(d B_f) exactly; in the
//    sector r = γmv/(qB)  =>  m/q = rB / (γv), γ = 1/√(1 − v²/c²)
//  - multi-collector: one field and potential, one effective radius per collector.
// Engine 1.x used the non-relativistic forms ((rB)²/(2U) and rB/v) with CODATA 2018;
// `Physics` selects either, so a 1.x result can be reproduced.

const positiveMeasured = (q: Parameters<typeof measured>[0], what: string) =>
  measured(q).refine(m => m.value > 0, { message: `${what} must be greater than zero`, path: ['value'] })

export const potentialSectorGeometry = z.object({
  kind: z.literal('potential-sector'),
  analyzerRadius: positiveMeasured('length', 'the analyzer radius'),
  detector: detectorSpec.optional(),
}).strict()

export const wienSectorGeometry = z.object({
  kind: z.literal('wien-sector'),
  analyzerRadius: positiveMeasured('length', 'the analyzer radius'),
  plateGap: positiveMeasured('length', 'the plate gap'),
  detector: detectorSpec.optional(),
}).strict()

export const multiCollectorGeometry = z.object({
  kind: z.literal('multi-collector'),
  collectors: z.array(z.object({
    id: z.string().trim().min(1).max(32),
    effectiveRadius: positiveMeasured('length', 'an effective radius'),
    /** The collector's detector (Faraday cup with its amplifier, or ion counter); optional. */
    detector: detectorSpec.optional(),
  }).strict()).min(1, 'needs at least one collector').max(32)
    .refine(cs => new Set(cs.map(c => c.id)).size === cs.length, 'collector ids must be unique'),
}).strict()

export const geometry = z.discriminatedUnion('kind', [potentialSectorGeometry, wienSectorGeometry, multiCollectorGeometry], {
  error: 'kind must be one of potential-sector, wien-sector, multi-collector',
})
export type Geometry = z.infer<typeof geometry>
export type GeometryKind = Geometry['kind']

/** A fixed reading: one value with its unit and (optionally) its standard uncertainty. */
export interface Setting { value: number, unit: string, u?: number }
/** What an instrument reports for one acquisition, before any unit is resolved. */
export interface RawReadings {
  /** Fixed readings by name: acceleratingVoltage, field, plateVoltage, filterField. */
  settings: Record<string, Setting | undefined>
  /** The swept reading, absent for static (peak-jumping) readings. */
  sweep?: { reading: 'field' | 'acceleratingVoltage', values: ArrayLike<number>, unit: string, u?: number }
  /** One detector column per collector (a single-collector instrument has one). */
  detectors: {
    collector?: string
    values: ArrayLike<number>
    unit: string
    /** Dwell time per point, for raw counts. */
    dwell?: { value: number, unit: string }
    /** On-peak-zero or off-peak readings in the column's unit (static: one per cycle, or a block). */
    baseline?: ArrayLike<number>
  }[]
}

function setting(readings: RawReadings, name: string, quantity: 'field' | 'voltage'): { value: number, u: number } {
  const s = readings.settings[name]
  if (!s) throw new EngineError(`settings.${name}`, 'missing', 'is required for this geometry')
  const f = siFactor(quantity, s.unit, `settings.${name}.unit`)
  if (!Number.isFinite(s.value)) throw new EngineError(`settings.${name}.value`, 'not-finite', 'must be a finite number')
  assertPositive(`settings.${name}.value`, s.value)
  return { value: s.value * f, u: (s.u ?? 0) * f }
}

const radiusOf = (m: Measured, field: string) => measuredSI('length', m, field)

// The finiteness check sits inside each conversion loop (b − b is 0 only for finite b), so
// a column is read once.
function notFinite(i: number, v: unknown): never {
  throw new EngineError(`sweep.values[${i}]`, 'not-finite', `must be a finite number, got ${v === null ? 'null' : String(v)}`)
}

/** m/z (u per e) of each point of a sweep, for one collector radius. No per-point objects. */
export interface MzColumn {
  mz: Float64Array
  /** Relative standard uncertainty of m/z from the registered uncertainties (GUM first order). */
  relU: (mz: number) => number
}

/** The first non-finite value of a typed column, reported as the per-point check would. */
function firstNotFinite(values: Float64Array): never {
  const i = values.findIndex(b => b - b !== 0)
  notFinite(i, values[i])
}

/**
 * m/z = c·B² − k over a field sweep. A function of its own so that c and k are locals of the
 * loop, not slots of the closure context that `relU` captures (V8 reloads those each turn).
 * A Float64Array (the simulator's and the benchmark's column) takes a loop with no branch per
 * point: b·0 is 0 for a finite b and NaN otherwise, so two running sums of it (two points a
 * turn, so neither sum waits on the other) say after the loop whether a value was not finite.
 * Measured with `npm run bench:engine` (DEVELOPERS.md, Measured). Other columns (JSON arrays)
 * keep the check per point, which also refuses null and strings.
 */
function fieldSweepLoop(values: ArrayLike<number>, out: Float64Array, c: number, k: number) {
  if (values instanceof Float64Array) return fieldSweepTyped(values, out, c, k)
  for (let i = 0; i < out.length; i++) { const b = values[i]; if (typeof b !== 'number' || b - b !== 0) notFinite(i, b); out[i] = c * b * b - k }
}

function fieldSweepTyped(values: Float64Array, out: Float64Array, c: number, k: number) {
  const n = out.length
  let bad0 = 0
  let bad1 = 0
  let i = 0
  for (; i + 1 < n; i += 2) {
    const b0 = values[i]!
    const b1 = values[i + 1]!
    out[i] = c * b0 * b0 - k
    out[i + 1] = c * b1 * b1 - k
    bad0 += b0 * 0
    bad1 += b1 * 0
  }
  if (i < n) { const b = values[i]!; out[i] = c * b * b - k; bad0 += b * 0 }
  if (bad0 + bad1 !== 0) firstNotFinite(values)
}

/**
 * Converts the swept reading to m/z for a collector of radius `radius` (SI). The factor in
 * front of each point's formula is computed once; the relativistic correction costs one
 * subtraction per point (field sweep) or is part of the factor (Wien filter).
 */
export function sweepToMz(geo: Geometry, readings: RawReadings, collectorRadius?: { value: number, u: number }, physics: Physics = PHYSICS_2X): MzColumn {
  const sweep = readings.sweep
  if (!sweep) throw new EngineError('sweep', 'missing', 'a profile spectrum needs a swept reading')
  const n = sweep.values.length
  if (n < 2) throw new EngineError('sweep.values', 'too-short', `a sweep needs at least 2 points, got ${n}`)
  const quantity = sweep.reading === 'field' ? 'field' : 'voltage'
  const unitFactor = siFactor(quantity, sweep.unit, 'sweep.unit')
  const uSweep = (sweep.u ?? 0) * unitFactor
  const values = sweep.values
  const out = new Float64Array(n)
  const K = kgPerCToUPerE(physics.constants)
  const c2 = physics.constants.speedOfLightMps ** 2

  const r = collectorRadius ?? radiusOf((geo as { analyzerRadius: Measured }).analyzerRadius, 'geometry.analyzerRadius')
  if (geo.kind === 'wien-sector') {
    if (sweep.reading !== 'field') throw new EngineError('sweep.reading', 'unsupported', 'a Wien-filter sector sweeps its analyzer field')
    const d = radiusOf(geo.plateGap, 'geometry.plateGap')
    const V = setting(readings, 'plateVoltage', 'voltage')
    const Bf = setting(readings, 'filterField', 'field')
    const v = V.value / (d.value * Bf.value)
    if (physics.relativistic && v >= physics.constants.speedOfLightMps) throw new EngineError('settings.plateVoltage', 'faster-than-light', `V/(d·B_f) = ${v.toExponential(3)} m/s is not below c`)
    // m/z = r B / (γ v) · e/m_u, with v = V/(d B_f) and 1/γ = √(1 − v²/c²)
    const invGamma = physics.relativistic ? Math.sqrt(1 - v * v / c2) : 1
    const c = r.value / v * invGamma * K * unitFactor
    for (let i = 0; i < n; i++) { const b = values[i]; if (typeof b !== 'number' || b - b !== 0) notFinite(i, b); out[i] = c * b }
    // γ's share of the sensitivities is of order v²/c² (< 1e-4 of u): neglected.
    const fixed = (r.u / r.value) ** 2 + (Bf.u / Bf.value) ** 2 + (d.u / d.value) ** 2 + (V.u / V.value) ** 2
    return { mz: out, relU: mz => Math.sqrt(fixed + (uSweep / (mz / c * unitFactor)) ** 2) }
  }
  if (sweep.reading === 'field') {
    const U = setting(readings, 'acceleratingVoltage', 'voltage')
    // m/z = ((r B)² / (2U) − U/(2c²)) · e/m_u
    const c = r.value * r.value / (2 * U.value) * K * unitFactor * unitFactor
    const k = physics.relativistic ? U.value / (2 * c2) * K : 0
    fieldSweepLoop(values, out, c, k)
    // GUM 5.1.2 with mz₀ = c b² (the non-relativistic part): ∂mz/∂r = 2mz₀/r, ∂mz/∂B = 2mz₀/B,
    // ∂mz/∂U = −(mz₀ + k)/U.
    const rr = r.u / r.value
    const rU = U.u / U.value
    return {
      mz: out,
      relU: (mz) => {
        const mz0 = mz + k
        const B = Math.sqrt(mz0 / c) * unitFactor
        return Math.sqrt((2 * mz0 * rr) ** 2 + ((mz0 + k) * rU) ** 2 + (2 * mz0 * uSweep / B) ** 2) / mz
      },
    }
  }
  const B = setting(readings, 'field', 'field')
  const c = (r.value * B.value) ** 2 / 2 * K / unitFactor
  // m/z = (r B)² / (2U) · e/m_u − U/(2c²) · e/m_u, U = u · unitFactor
  const k = physics.relativistic ? unitFactor / (2 * c2) * K : 0
  for (let i = 0; i < n; i++) {
    const u = values[i]
    if (typeof u !== 'number' || u - u !== 0) notFinite(i, u)
    if (u <= 0) throw new EngineError(`sweep.values[${i}]`, 'not-positive', 'an accelerating voltage must be positive')
    out[i] = c / u - k * u
  }
  // The relativistic term's share of the sensitivities (≈ U/(2c²)/(m/q) < 1e-5 of u) is neglected.
  const fixed = (2 * r.u / r.value) ** 2 + (2 * B.u / B.value) ** 2
  return { mz: out, relU: (mz) => { const U = c / mz * unitFactor; return Math.sqrt(fixed + (uSweep / U) ** 2) } }
}

/** m/z at each collector of a multi-collector for one static reading of field and potential. */
export function staticCollectorMz(geo: Geometry, readings: RawReadings, physics: Physics = PHYSICS_2X): { collector: string, mz: number, relU: number }[] {
  const B = setting(readings, 'field', 'field')
  const U = setting(readings, 'acceleratingVoltage', 'voltage')
  const collectors = geo.kind === 'multi-collector'
    ? geo.collectors.map(c => ({ id: c.id, r: radiusOf(c.effectiveRadius, `geometry.collectors.${c.id}.effectiveRadius`) }))
    : geo.kind === 'potential-sector' ? [{ id: 'main', r: radiusOf(geo.analyzerRadius, 'geometry.analyzerRadius') }] : []
  if (!collectors.length) throw new EngineError('geometry.kind', 'unsupported', 'static readings need a potential sector or a multi-collector')
  const K = kgPerCToUPerE(physics.constants)
  const k = physics.relativistic ? U.value / (2 * physics.constants.speedOfLightMps ** 2) * K : 0
  return collectors.map(({ id, r }) => {
    const mz0 = (r.value * B.value) ** 2 / (2 * U.value) * K
    const mz = mz0 - k
    return {
      collector: id,
      mz,
      relU: Math.sqrt((2 * mz0 * r.u / r.value) ** 2 + (2 * mz0 * B.u / B.value) ** 2 + ((mz0 + k) * U.u / U.value) ** 2) / mz,
    }
  })
}

/**
 * Inverse of the potential-sector relation: the field that brings m/z onto radius r at
 * potential U, (rB)² = 2U·(m/q) + (U/c)² (relativistic unless engine 1.x physics is asked for).
 */
export function fieldForMz(mz: number, radiusM: number, voltageV: number, physics: Physics = PHYSICS_2X): number {
  const rel = physics.relativistic ? (voltageV / physics.constants.speedOfLightMps) ** 2 : 0
  return Math.sqrt(2 * voltageV * mz / kgPerCToUPerE(physics.constants) + rel) / radiusM
}
