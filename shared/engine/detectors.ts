import { z } from 'zod'
import { EngineError } from './errors'
import { detectorQuantity, measured, siFactor, unitFactors } from './units'

// Detectors, registered per collector in the geometry's params (so they are versioned with
// the geometry: a new gain calibration is a new geometry version).
//  - Faraday cup: reads a current, or its amplifier's output in volts through the feedback
//    resistor R: I = V / R (Ohm's law); a relative gain factor g per cup (the cup's
//    amplifier against the reference amplifier, from a gain calibration) divides it:
//    I = V / (R·g). The uncertainties of R and g are common to every reading of the cup.
//  - Ion counter: counts in a dwell time t give the recorded rate m = N / t, corrected for
//    the counter's dead time τ by a named model (Knoll, Radiation Detection and Measurement,
//    4th ed., Wiley 2010, §4.VII):
//      non-paralysable: n = m / (1 − mτ)
//      paralysable:     m = n·exp(−nτ), solved for n on the branch nτ < 1 (Newton's method)
//    with ∂n/∂τ = n² (non-paralysable) or n² / (1 − nτ) (paralysable, by implicit
//    differentiation), so u(τ) propagates into every rate (GUM 5.1.2).

const positive = (what: string) => z.number({ error: 'must be a number' }).finite().positive(`${what} must be greater than zero`)

export const faradayDetector = z.object({
  type: z.literal('faraday'),
  /** Feedback resistor of the cup's amplifier (e.g. 1e11 Ω), with its standard uncertainty. */
  resistor: measured('resistance').refine(m => m.value > 0, { message: 'the resistor must be greater than zero', path: ['value'] }),
  /** Relative gain factor of the cup's amplifier (1 = the reference amplifier) from a gain calibration. */
  gain: z.object({
    value: positive('a gain factor'),
    u: z.number().finite().min(0, 'a standard uncertainty cannot be negative').default(0),
    /** When the gain calibration was made (shown with the geometry version that carries it). */
    calibratedOn: z.iso.date({ error: 'must be a date, e.g. 2026-11-30' }).optional(),
  }).strict().default({ value: 1, u: 0 }),
}).strict()

export const ionCounterDetector = z.object({
  type: z.literal('ion-counter'),
  deadTime: measured('time').refine(m => m.value >= 0, { message: 'a dead time cannot be negative', path: ['value'] }),
  model: z.enum(['non-paralysable', 'paralysable'], { error: 'must be non-paralysable or paralysable' }),
}).strict()

export const detectorSpec = z.discriminatedUnion('type', [faradayDetector, ionCounterDetector], {
  error: 'type must be faraday or ion-counter',
})
export type DetectorSpec = z.infer<typeof detectorSpec>

/** A detector's numbers in SI, with their standard uncertainties; perturbed one at a time for sensitivities. */
export interface DetectorParams {
  type: 'faraday' | 'ion-counter' | 'unregistered'
  resistorOhm: number
  resistorU: number
  gain: number
  gainU: number
  deadTimeS: number
  deadTimeU: number
  model: 'non-paralysable' | 'paralysable'
}

export function detectorParams(spec: DetectorSpec | undefined, field: string): DetectorParams {
  const none: DetectorParams = { type: 'unregistered', resistorOhm: 0, resistorU: 0, gain: 1, gainU: 0, deadTimeS: 0, deadTimeU: 0, model: 'non-paralysable' }
  if (!spec) return none
  if (spec.type === 'faraday') {
    const f = siFactor('resistance', spec.resistor.unit, `${field}.resistor.unit`)
    return { ...none, type: 'faraday', resistorOhm: spec.resistor.value * f, resistorU: spec.resistor.u * f, gain: spec.gain.value, gainU: spec.gain.u }
  }
  const f = siFactor('time', spec.deadTime.unit, `${field}.deadTime.unit`)
  return { ...none, type: 'ion-counter', deadTimeS: spec.deadTime.value * f, deadTimeU: spec.deadTime.u * f, model: spec.model }
}

/** One detector column as the acquisition gives it. */
export interface DetectorColumnInput {
  unit: string
  values: ArrayLike<number>
  /** Dwell time per point, required for raw counts. */
  dwell?: { value: number, unit: string }
}

/** The true rate n (s⁻¹) from a recorded rate m by the model; throws beyond the counter's reach. */
export function deadTimeCorrected(m: number, tau: number, model: 'non-paralysable' | 'paralysable', field: string): number {
  if (tau === 0 || m === 0) return m
  if (model === 'non-paralysable') {
    const loss = 1 - m * tau
    if (!(loss > 0)) throw new EngineError(field, 'counter-saturated', `a recorded rate of ${m.toExponential(3)} s⁻¹ is at or beyond 1/τ: the non-paralysable counter is saturated`)
    return m / loss
  }
  // m = n·exp(−nτ) peaks at n = 1/τ with m = 1/(eτ): beyond that no true rate gives m.
  if (m * tau > Math.exp(-1)) throw new EngineError(field, 'counter-saturated', `a recorded rate of ${m.toExponential(3)} s⁻¹ is beyond 1/(eτ): the paralysable counter is saturated`)
  // Newton from n = m: f(n) = n·exp(−nτ) − m is increasing and concave for nτ < 1, so the
  // iterates rise monotonically to the root.
  let n = m
  for (let i = 0; i < 100; i++) {
    const e = Math.exp(-n * tau)
    const step = (n * e - m) / (e * (1 - n * tau))
    n -= step
    if (Math.abs(step) <= n * 1e-15) break
  }
  return n
}

/** Relative standard uncertainty of a dead-time-corrected rate n from u(τ). */
export function deadTimeRelU(n: number, p: DetectorParams): number {
  if (p.type !== 'ion-counter' || p.deadTimeU === 0) return 0
  return p.model === 'non-paralysable' ? n * p.deadTimeU : n * p.deadTimeU / (1 - n * p.deadTimeS)
}

export interface DetectorSignal {
  /** Signal in SI: A (Faraday) or s⁻¹ (ion counter), dead-time corrected. */
  values: Float64Array
  unit: 'A' | 'cps'
  /** Raw counts per point when the column was counts (their Poisson variance is the count). */
  counts: Float64Array | null
  dwellS: number | null
  /** What was done to the column, in order, by name. */
  corrections: string[]
  /**
   * Relative standard uncertainty common to every point of the column from the registered
   * resistor and gain (dead time is rate-dependent: `deadTimeRelU`). 0 when nothing is registered.
   */
  commonRelU: number
}

/** Converts one detector column to SI through its registered detector. */
export function detectorSignal(p: DetectorParams, column: DetectorColumnInput, field: string): DetectorSignal {
  const quantity = detectorQuantity(column.unit, `${field}.unit`)
  const factor = siFactor(quantity, column.unit, `${field}.unit`)
  const n = column.values.length
  const values = new Float64Array(n)
  for (let i = 0; i < n; i++) {
    const v = column.values[i]
    if (typeof v !== 'number' || v - v !== 0) throw new EngineError(`${field}.values[${i}]`, 'not-finite', `must be a finite number, got ${v === null ? 'null' : String(v)}`)
    values[i] = v * factor
  }
  const corrections: string[] = []
  if (quantity === 'current' || quantity === 'detectorVoltage') {
    if (p.type === 'ion-counter') throw new EngineError(`${field}.unit`, 'detector-mismatch', `"${column.unit}" is a Faraday reading, but this collector's registered detector is an ion counter`)
    let scale = 1
    let rel2 = 0
    if (quantity === 'detectorVoltage') {
      if (p.type !== 'faraday') throw new EngineError(`${field}.unit`, 'resistor-missing', 'readings in volts need a Faraday detector with its amplifier resistor registered in the instrument\'s geometry')
      scale /= p.resistorOhm
      rel2 += (p.resistorU / p.resistorOhm) ** 2
      corrections.push(`I = V/R, R = ${p.resistorOhm.toExponential(4)} Ω`)
    }
    if (p.type === 'faraday' && p.gain !== 1) corrections.push(`gain factor ${p.gain}`)
    if (p.type === 'faraday') { scale /= p.gain; rel2 += (p.gainU / p.gain) ** 2 }
    if (scale !== 1) for (let i = 0; i < n; i++) values[i] = values[i]! * scale
    return { values, unit: 'A', counts: null, dwellS: null, corrections, commonRelU: Math.sqrt(rel2) }
  }
  if (p.type === 'faraday') throw new EngineError(`${field}.unit`, 'detector-mismatch', `"${column.unit}" is an ion-counter reading, but this collector's registered detector is a Faraday cup`)
  let counts: Float64Array | null = null
  let dwellS: number | null = null
  if (quantity === 'counts') {
    if (!column.dwell) throw new EngineError(`${field}.dwell`, 'missing', 'raw counts need the dwell time per point')
    dwellS = column.dwell.value * siFactor('time', column.dwell.unit, `${field}.dwell.unit`)
    if (!(dwellS > 0)) throw new EngineError(`${field}.dwell.value`, 'not-positive', 'a dwell time must be greater than zero')
    counts = values.slice()
    for (let i = 0; i < n; i++) {
      if (values[i]! < 0) throw new EngineError(`${field}.values[${i}]`, 'negative-counts', 'counts cannot be negative')
      values[i] = values[i]! / dwellS
    }
    corrections.push(`rate = counts / ${dwellS} s`)
  }
  if (p.type === 'ion-counter' && p.deadTimeS > 0) {
    for (let i = 0; i < n; i++) values[i] = deadTimeCorrected(values[i]!, p.deadTimeS, p.model, `${field}.values[${i}]`)
    corrections.push(`${p.model} dead time τ = ${p.deadTimeS.toExponential(3)} s (Knoll 2010)`)
  }
  return { values, unit: 'cps', counts, dwellS, corrections, commonRelU: 0 }
}

/** Units a detector column may arrive in, for forms and documentation. */
export const detectorUnits = [
  ...Object.keys(unitFactors.current), ...Object.keys(unitFactors.detectorVoltage), ...Object.keys(unitFactors.countRate), ...Object.keys(unitFactors.counts),
]
