import { z } from 'zod'
import { EngineError } from './errors'

// SI factors of the units readings arrive in. A column's unit is resolved once, then
// every point is multiplied by one number.
export const unitFactors = {
  field: { T: 1, mT: 1e-3, G: 1e-4, kG: 1e-1 },
  voltage: { V: 1, kV: 1e3, mV: 1e-3 },
  length: { m: 1, cm: 1e-2, mm: 1e-3 },
  current: { A: 1, mA: 1e-3, uA: 1e-6, µA: 1e-6, nA: 1e-9, pA: 1e-12, fA: 1e-15 },
  countRate: { cps: 1, 'counts/s': 1, Hz: 1 },
  /** Raw counts in a dwell time: divided by the dwell to give a rate. */
  counts: { counts: 1 },
  /** A Faraday amplifier's output: divided by its feedback resistor to give a current (I = V/R). */
  detectorVoltage: { V: 1, mV: 1e-3, uV: 1e-6, µV: 1e-6 },
  resistance: { 'Ω': 1, 'ohm': 1, 'kΩ': 1e3, 'MΩ': 1e6, 'GΩ': 1e9, 'TΩ': 1e12, 'kohm': 1e3, 'Mohm': 1e6, 'Gohm': 1e9, 'Tohm': 1e12 },
  time: { s: 1, ms: 1e-3, us: 1e-6, µs: 1e-6, ns: 1e-9 },
} as const

export type Quantity = keyof typeof unitFactors
export type UnitOf<Q extends Quantity> = keyof (typeof unitFactors)[Q] & string

/** The SI factor of `unit` for `quantity`; a missing or unknown unit names `field`. */
export function siFactor(quantity: Quantity, unit: string | undefined | null, field: string): number {
  if (!unit) throw new EngineError(field, 'unit-missing', `needs a unit (one of ${Object.keys(unitFactors[quantity]).join(', ')})`)
  // Own entries only: a unit named "constructor" is unknown, not Object's constructor.
  const table = unitFactors[quantity] as Record<string, number>
  const factor = Object.hasOwn(table, unit.trim()) ? table[unit.trim()] : undefined
  if (factor === undefined) {
    throw new EngineError(field, 'unit-unknown', `unknown ${quantity} unit "${unit}" (use one of ${Object.keys(unitFactors[quantity]).join(', ')})`)
  }
  return factor
}

/** A column converted to SI in one pass (a new Float64Array; the input is left alone). */
export function toSI(quantity: Quantity, values: ArrayLike<number>, unit: string, field: string): Float64Array {
  const factor = siFactor(quantity, unit, field)
  const out = new Float64Array(values.length)
  for (let i = 0; i < values.length; i++) out[i] = (values[i] as number) * factor
  return out
}

/**
 * Detector signals: a current or the amplifier's volts (Faraday cup), a count rate or raw
 * counts in a dwell time (ion counter).
 */
export function detectorQuantity(unit: string, field: string): 'current' | 'countRate' | 'counts' | 'detectorVoltage' {
  if (Object.hasOwn(unitFactors.current, unit)) return 'current'
  if (Object.hasOwn(unitFactors.countRate, unit)) return 'countRate'
  if (Object.hasOwn(unitFactors.counts, unit)) return 'counts'
  if (Object.hasOwn(unitFactors.detectorVoltage, unit)) return 'detectorVoltage'
  throw new EngineError(field, 'unit-unknown', `unknown detector unit "${unit}" (a current such as A, pA, fA; volts V, mV through a registered resistor; a count rate cps; or counts with a dwell time)`)
}

const unitNames = (q: Quantity) => Object.keys(unitFactors[q]) as [string, ...string[]]

/** A registered value with its unit and standard uncertainty (GUM: u, same unit). */
export const measured = (quantity: Quantity) => z.object({
  value: z.number({ error: 'must be a number' }).finite('must be a finite number'),
  unit: z.enum(unitNames(quantity), { error: `must be one of ${unitNames(quantity).join(', ')}` }),
  u: z.number({ error: 'must be a number (0 when not known)' }).finite().min(0, 'a standard uncertainty cannot be negative').default(0),
}).strict()
export type Measured = { value: number, unit: string, u: number }

/** A measured value in SI with its uncertainty. */
export function measuredSI(quantity: Quantity, m: Measured, field: string): { value: number, u: number } {
  const f = siFactor(quantity, m.unit, field)
  return { value: m.value * f, u: m.u * f }
}
