import { EngineError } from '../errors'
import { leastSquares } from './leastSquares'
import { coverageFactor, studentTCentral } from './studentT'
import type { Measured } from './types'

// Time-zero regression of static-vacuum signals. Once the gas is let into a static mass
// spectrometer the beams change with time: the source consumes (ionises and implants) the gas
// and memory or leaks add to it, so each beam is regressed to the inlet time t = 0 (common
// practice of static noble-gas mass spectrometry; e.g. McDougall & Harrison, Geochronology and
// Thermochronology by the 40Ar/39Ar Method, 2nd ed., OUP 1999, §3.4, from memory). Two models:
//   linear       I(t) = I₀ + b·t                      (ingrowth or slow consumption)
//   exponential  I(t) = I₀·exp(c·t)                   (first-order consumption or ingrowth)
// The linear model by ordinary least squares; the exponential one by Gauss–Newton started from
// the log-linear fit (or from the linear fit when a reading is not positive). The intercept's
// standard uncertainty is √ of its variance in s²·(JᵀJ)⁻¹, s² = SSR/(n − 2) (GUM, JCGM 100:2008,
// H.3: two parameters, n − 2 degrees of freedom), and k95 the Student-t factor for those degrees
// of freedom (GUM G.3.4).
//
// Poor fits are flagged, never hidden: a quadratic term in the residuals with |t| > 3.5 (the
// model misses curvature; 3.5 keeps false flags under about 1 in 200 at 10–20 cycles — common
// practice, no source), an exponential fit that did not converge (the linear fit is used instead),
// and an intercept more uncertain than 5 % (too little signal; common practice, no source).
//
// Near the noise (a blank) the exponential fit is not used: the least-squares estimator of a
// model non-linear in its parameters is biased by terms of order (σ/signal)² (Box, J. R. Stat.
// Soc. B 33 (1971) 171, from memory), and on simulated blanks at signal-to-noise ≈ 1 it came out
// high by a fraction of its u, every time; a blank's intercept then biased every sample it was
// taken from. When the linear intercept is more uncertain than 2 % the linear fit stands, flagged
// 'time-zero-linear-at-low-signal' (2 %: where that bias stays under a few % of u; common
// practice, no source).

export type TimeZeroModel = 'linear' | 'exponential'

export interface TimeZeroFit {
  model: TimeZeroModel
  intercept: Measured
  /** b in signal units per s (linear) or c in 1/s (exponential). */
  rate: Measured
  cycles: number
  dof: number
  /** Coverage factor for 95 % from Student's t with `dof` degrees of freedom. */
  k95: number
  residualSd: number
  flags: string[]
}

export const TIME_ZERO_SOURCE = 'time-zero regression to the inlet time, least squares with u from s²(JᵀJ)⁻¹, n − 2 degrees of freedom (GUM JCGM 100:2008 H.3)'
export const MIN_TIME_ZERO_CYCLES = 4
const CURVATURE_T = 3.5
const IMPRECISE_REL = 0.05
const LOW_SIGNAL_REL = 0.02

function linearFit(t: number[], y: number[]) {
  const fit = leastSquares(t.map(v => [1, v]), y)
  if (!fit) return null
  return { i0: fit.coefficients[0]!, rate: fit.coefficients[1]!, cov: fit.covariance, dof: fit.dof, residualSd: fit.residualSd, residuals: fit.residuals }
}

function exponentialFit(t: number[], y: number[]) {
  const n = t.length
  let A: number
  let c: number
  if (y.every(v => v > 0)) {
    const log = leastSquares(t.map(v => [1, v]), y.map(v => Math.log(v)))
    if (!log) return null
    A = Math.exp(log.coefficients[0]!)
    c = log.coefficients[1]!
  }
  else {
    const lin = linearFit(t, y)
    if (!lin || lin.i0 === 0) return null
    A = lin.i0
    c = lin.rate / lin.i0
  }
  const ssr = (a: number, k: number) => y.reduce((s, v, i) => s + (v - a * Math.exp(k * t[i]!)) ** 2, 0)
  let current = ssr(A, c)
  let converged = false
  for (let iter = 0; iter < 60 && !converged; iter++) {
    // Gauss–Newton on the residuals r = y − A·e^{ct}: columns ∂f/∂A = e^{ct}, ∂f/∂c = A·t·e^{ct}.
    const J = t.map(v => [Math.exp(c * v), A * v * Math.exp(c * v)])
    const r = y.map((v, i) => v - A * J[i]![0]!)
    const step = leastSquares(J, r)
    if (!step) return null
    let [dA, dc] = step.coefficients as [number, number]
    let accepted = false
    for (let halving = 0; halving < 30; halving++) {
      const next = ssr(A + dA, c + dc)
      if (next <= current) {
        converged = Math.abs(dA) <= 1e-12 * Math.abs(A) && Math.abs(dc) <= 1e-12 * (Math.abs(c) + 1e-12) || current - next <= 1e-14 * current
        A += dA; c += dc; current = next; accepted = true
        break
      }
      dA /= 2; dc /= 2
    }
    if (!accepted) converged = true
  }
  const J = t.map(v => [Math.exp(c * v), A * v * Math.exp(c * v)])
  const final = leastSquares(J, y.map((v, i) => v - A * J[i]![0]!))
  if (!final || !Number.isFinite(A) || !Number.isFinite(c)) return null
  const dof = n - 2
  const s2 = current / dof
  // final.covariance is s²_step·(JᵀJ)⁻¹ with the step's own residuals; rescale to the fit's s².
  const scale = final.residualSd > 0 ? s2 / (final.residualSd ** 2) : 0
  const cov = final.covariance.map(row => row.map(v => v * scale))
  const residuals = y.map((v, i) => v - A * Math.exp(c * t[i]!))
  return { i0: A, rate: c, cov, dof, residualSd: Math.sqrt(s2), residuals }
}

/** Regresses one beam's cycle readings to t = 0. Throws when there are too few cycles. */
export function timeZeroIntercept(t: ArrayLike<number>, signal: ArrayLike<number>, model: TimeZeroModel, field = 'cycles'): TimeZeroFit {
  const ts = Array.from(t)
  const ys = Array.from(signal)
  if (ts.length !== ys.length) throw new EngineError(field, 'length-mismatch', 'needs one time per reading')
  if (ts.length < MIN_TIME_ZERO_CYCLES) throw new EngineError(field, 'too-few-cycles', `needs at least ${MIN_TIME_ZERO_CYCLES} cycles for a time-zero regression, got ${ts.length}`)
  if (!ts.concat(ys).every(Number.isFinite)) throw new EngineError(field, 'not-finite', 'times and signals must be finite numbers')
  if (Math.max(...ts) === Math.min(...ts)) throw new EngineError(field, 'no-time-spread', 'the cycles must span some time')
  const flags: string[] = []
  let used: TimeZeroModel = model
  const linear = linearFit(ts, ys)
  let fit = linear
  if (model === 'exponential' && linear) {
    const relU = Math.sqrt(Math.max(linear.cov[0]![0]!, 0)) / Math.abs(linear.i0)
    if (!(relU <= LOW_SIGNAL_REL)) { used = 'linear'; flags.push('time-zero-linear-at-low-signal') }
    else {
      fit = exponentialFit(ts, ys)
      if (!fit) { flags.push('time-zero-exponential-failed'); used = 'linear'; fit = linear }
    }
  }
  if (!fit) throw new EngineError(field, 'singular-fit', 'the time-zero regression has no solution')
  const intercept = { value: fit.i0, u: Math.sqrt(Math.max(fit.cov[0]![0]!, 0)) }
  if (curvatureT(ts, fit.residuals) > CURVATURE_T) flags.push('time-zero-poor-fit')
  if (!(intercept.u <= IMPRECISE_REL * Math.abs(intercept.value))) flags.push('time-zero-imprecise')
  return {
    model: used,
    intercept,
    rate: { value: fit.rate, u: Math.sqrt(Math.max(fit.cov[1]![1]!, 0)) },
    cycles: ts.length,
    dof: fit.dof,
    k95: coverageFactor(fit.dof, 0.95),
    residualSd: fit.residualSd,
    flags,
  }
}

/** |t| of the quadratic coefficient when the residuals are regressed on 1, t, t² (0 with too few points). */
function curvatureT(t: number[], residuals: number[]): number {
  if (t.length < 5) return 0
  const mean = t.reduce((s, v) => s + v, 0) / t.length
  const span = Math.max(...t) - Math.min(...t)
  const fit = leastSquares(t.map((v) => { const x = (v - mean) / span; return [1, x, x * x] }), residuals)
  if (!fit || !(fit.covariance[2]![2]! > 0)) return 0
  return Math.abs(fit.coefficients[2]!) / Math.sqrt(fit.covariance[2]![2]!)
}

/** P(|T| ≤ 2) for the fit's degrees of freedom: the coverage of ±2u that a coverage test expects. */
export function coverageOfTwoU(dof: number): number {
  return studentTCentral(2, dof)
}
