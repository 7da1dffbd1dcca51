import { z } from 'zod'
import { KG_PER_C_TO_U_PER_E } from './constants'
import { EngineError, assertPositive } from './errors'
import { measured, measuredSI, siFactor, type Measured } from './units'

// The instrument geometries Arcwise knows, each with its registered parameters and their
// standard uncertainties. Relations (DESIGN.md, "Physics"):
//  - accelerating-potential sector: qU = mv²/2 and r = mv/(qB)  =>  m/q = (rB)² / (2U)
//  - Wien filter before the sector: E = V/d, v = E/B_f; in the sector qvB = mv²/r  =>  m/q = rB/v
//  - multi-collector: one field and potential, one effective radius per collector.

const positiveMeasured = (q: Parameters<typeof measured>[0], what: string) =>
  measured(q).refine(m => m.value > 0, { message: `${what} must be greater than zero`, path: ['value'] })

export const potentialSectorGeometry = z.object({
  kind: z.literal('potential-sector'),
  analyzerRadius: positiveMeasured('length', 'the analyzer radius'),
}).strict()

export const wienSectorGeometry = z.object({
  kind: z.literal('wien-sector'),
  analyzerRadius: positiveMeasured('length', 'the analyzer radius'),
  plateGap: positiveMeasured('length', 'the plate gap'),
}).strict()

export const multiCollectorGeometry = z.object({
  kind: z.literal('multi-collector'),
  collectors: z.array(z.object({
    id: z.string().trim().min(1).max(32),
    effectiveRadius: positiveMeasured('length', 'an effective radius'),
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
  detectors: { collector?: string, values: ArrayLike<number>, unit: string }[]
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

/**
 * Converts the swept reading to m/z for a collector of radius `radius` (SI). The factor in
 * front of each point's formula is computed once.
 */
export function sweepToMz(geo: Geometry, readings: RawReadings, collectorRadius?: { value: number, u: number }): MzColumn {
  const sweep = readings.sweep
  if (!sweep) throw new EngineError('sweep', 'missing', 'a profile spectrum needs a swept reading')
  const n = sweep.values.length
  if (n < 2) throw new EngineError('sweep.values', 'too-short', `a sweep needs at least 2 points, got ${n}`)
  const quantity = sweep.reading === 'field' ? 'field' : 'voltage'
  const unitFactor = siFactor(quantity, sweep.unit, 'sweep.unit')
  const uSweep = (sweep.u ?? 0) * unitFactor
  const values = sweep.values
  const out = new Float64Array(n)

  const r = collectorRadius ?? radiusOf((geo as { analyzerRadius: Measured }).analyzerRadius, 'geometry.analyzerRadius')
  if (geo.kind === 'wien-sector') {
    if (sweep.reading !== 'field') throw new EngineError('sweep.reading', 'unsupported', 'a Wien-filter sector sweeps its analyzer field')
    const d = radiusOf(geo.plateGap, 'geometry.plateGap')
    const V = setting(readings, 'plateVoltage', 'voltage')
    const Bf = setting(readings, 'filterField', 'field')
    // m/z = r B B_f d / V · e/m_u
    const c = r.value * Bf.value * d.value / V.value * KG_PER_C_TO_U_PER_E * unitFactor
    for (let i = 0; i < n; i++) { const b = values[i]; if (typeof b !== 'number' || b - b !== 0) notFinite(i, b); out[i] = c * b }
    const fixed = (r.u / r.value) ** 2 + (Bf.u / Bf.value) ** 2 + (d.u / d.value) ** 2 + (V.u / V.value) ** 2
    return { mz: out, relU: (mz) => Math.sqrt(fixed + (uSweep / (mz / c * unitFactor)) ** 2) }
  }
  if (sweep.reading === 'field') {
    const U = setting(readings, 'acceleratingVoltage', 'voltage')
    // m/z = (r B)² / (2U) · e/m_u
    const c = r.value * r.value / (2 * U.value) * KG_PER_C_TO_U_PER_E * unitFactor * unitFactor
    for (let i = 0; i < n; i++) { const b = values[i]; if (typeof b !== 'number' || b - b !== 0) notFinite(i, b); out[i] = c * b * b }
    const fixed = (2 * r.u / r.value) ** 2 + (U.u / U.value) ** 2
    return { mz: out, relU: (mz) => { const B = Math.sqrt(mz / c) * unitFactor; return Math.sqrt(fixed + (2 * uSweep / B) ** 2) } }
  }
  const B = setting(readings, 'field', 'field')
  const c = (r.value * B.value) ** 2 / 2 * KG_PER_C_TO_U_PER_E / unitFactor
  for (let i = 0; i < n; i++) {
    const u = values[i]
    if (typeof u !== 'number' || u - u !== 0) notFinite(i, u)
    if (u <= 0) throw new EngineError(`sweep.values[${i}]`, 'not-positive', 'an accelerating voltage must be positive')
    out[i] = c / u
  }
  const fixed = (2 * r.u / r.value) ** 2 + (2 * B.u / B.value) ** 2
  return { mz: out, relU: (mz) => { const U = c / mz * unitFactor; return Math.sqrt(fixed + (uSweep / U) ** 2) } }
}

/** m/z at each collector of a multi-collector for one static reading of field and potential. */
export function staticCollectorMz(geo: Geometry, readings: RawReadings): { collector: string, mz: number, relU: number }[] {
  const B = setting(readings, 'field', 'field')
  const U = setting(readings, 'acceleratingVoltage', 'voltage')
  const collectors = geo.kind === 'multi-collector'
    ? geo.collectors.map(c => ({ id: c.id, r: radiusOf(c.effectiveRadius, `geometry.collectors.${c.id}.effectiveRadius`) }))
    : geo.kind === 'potential-sector' ? [{ id: 'main', r: radiusOf(geo.analyzerRadius, 'geometry.analyzerRadius') }] : []
  if (!collectors.length) throw new EngineError('geometry.kind', 'unsupported', 'static readings need a potential sector or a multi-collector')
  return collectors.map(({ id, r }) => ({
    collector: id,
    mz: (r.value * B.value) ** 2 / (2 * U.value) * KG_PER_C_TO_U_PER_E,
    relU: Math.sqrt((2 * r.u / r.value) ** 2 + (2 * B.u / B.value) ** 2 + (U.u / U.value) ** 2),
  }))
}

/** Inverse of the potential-sector relation: the field that brings m/z onto radius r at potential U. */
export function fieldForMz(mz: number, radiusM: number, voltageV: number): number {
  return Math.sqrt(2 * voltageV * mz / KG_PER_C_TO_U_PER_E) / radiusM
}
