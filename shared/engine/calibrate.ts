import { inverse, Matrix, QrDecomposition, SingularValueDecomposition } from 'ml-matrix'
import { EngineError } from './errors'

// Calibration: from reference peaks of known m/z, a polynomial (degree 1..3) from the m/z the
// geometry gives to the true m/z, fitted by weighted least squares. The variable is centred
// and scaled to [-1, 1] before fitting, which keeps the normal problem well conditioned; a
// fit that is still ill-conditioned (reference points bunched together) is refused.
//  - Weights w_i = 1/u_i², u_i the reference peak's centroid uncertainty (with the reference
//    value's own, when given); without uncertainties every weight is 1.
//  - Covariance of the coefficients (Draper & Smith, Applied Regression Analysis, 3rd ed.,
//    Wiley 1998, §2.6 and §9.2): weighted, C = (AᵀWA)⁻¹ scaled by the Birge ratio squared
//    χ²/ν when that exceeds 1 (Birge, Phys. Rev. 40 (1932) 207: the scatter says the stated
//    u were too small); unweighted, C = s²(AᵀA)⁻¹ with s² = Σr²/ν. ν = n − p.
//  - RMS of the residuals in ppm over ν = n − p (the fit spends p degrees of freedom).
//  - The correction's uncertainty at x: u² = gᵀCg, g = (1, t, …, tᵈ) (GUM 5.2.2 with the
//    coefficients' covariances); the pipeline adds the peak's own centroid u in quadrature
//    (the correction's slope is 1 within ppm, so it is not carried).
//  - The calibrated range is the reference peaks' measured span; m/z more than
//    CALIBRATION_MARGIN of that span beyond it is flagged (extrapolation).

export interface CalibrationPoint {
  measuredMz: number
  referenceMz: number
  label?: string
  /** Standard uncertainty of the measured centroid (m/z). */
  measuredU?: number
  /** Standard uncertainty of the reference m/z (0 for atomic masses at this level). */
  referenceU?: number
}

export interface CalibrationFit {
  degree: number
  center: number
  halfRange: number
  /** Coefficients of t⁰..tᵈ with t = (mz − center) / halfRange. */
  coefficients: number[]
  residualsPpm: number[]
  /** √(Σ residual² / (n − p)) in ppm. */
  rmsPpm: number
  conditionNumber: number
  /** Weighted by the reference peaks' uncertainties, or ordinary least squares. */
  weighted: boolean
  /** Degrees of freedom n − p. */
  dof: number
  /** Weighted fits: χ² = Σ (r/u)² and the Birge ratio √(χ²/ν) (1 when ν = 0). */
  chiSquared: number | null
  birgeRatio: number | null
  /** Covariance matrix of the coefficients (p × p), in (m/z)². */
  covariance: number[][]
  /** Measured m/z span of the reference peaks. */
  range: [number, number]
  /** The geometry version the reference peaks were measured under; another version retires the fit. */
  geometryVersion?: number | null
}

/** What applying a fit needs; fits stored before engine 2 lack the covariance and the range. */
export type AppliedCalibration = Pick<CalibrationFit, 'center' | 'halfRange' | 'coefficients'> & Partial<Pick<CalibrationFit, 'covariance' | 'range' | 'geometryVersion'>>

const MAX_CONDITION = 1e8 // refuse beyond this (common practice, no source)
/** Extrapolation allowed before the flag, as a fraction of the calibrated span (common practice, no source). */
export const CALIBRATION_MARGIN = 0.02

export function fitCalibration(points: CalibrationPoint[], degree: number, geometryVersion?: number | null): CalibrationFit {
  if (!Number.isInteger(degree) || degree < 1 || degree > 3) throw new EngineError('degree', 'out-of-range', 'must be 1, 2 or 3')
  points.forEach((p, i) => {
    if (!Number.isFinite(p.measuredMz) || p.measuredMz <= 0) throw new EngineError(`points[${i}].measuredMz`, 'not-positive', 'must be a positive m/z')
    if (!Number.isFinite(p.referenceMz) || p.referenceMz <= 0) throw new EngineError(`points[${i}].referenceMz`, 'not-positive', 'must be a positive m/z')
    for (const k of ['measuredU', 'referenceU'] as const) {
      const v = p[k]
      if (v !== undefined && !(Number.isFinite(v) && v >= 0)) throw new EngineError(`points[${i}].${k}`, 'negative', 'a standard uncertainty must be zero or positive')
    }
  })
  // One point more than coefficients, so that residuals say something about the fit.
  if (points.length < degree + 2) {
    throw new EngineError('points', 'too-few', `a degree-${degree} fit needs at least ${degree + 2} reference peaks, got ${points.length}`)
  }
  const uOf = (p: CalibrationPoint) => Math.hypot(p.measuredU ?? 0, p.referenceU ?? 0)
  const withU = points.filter(p => uOf(p) > 0).length
  if (withU > 0 && withU < points.length) {
    const i = points.findIndex(p => !(uOf(p) > 0))
    throw new EngineError(`points[${i}].measuredU`, 'missing', 'give every reference peak its centroid uncertainty, or none (an unweighted fit)')
  }
  const weighted = withU === points.length
  const xs = points.map(p => p.measuredMz)
  const min = Math.min(...xs)
  const max = Math.max(...xs)
  const distinct = new Set(xs.map(x => x.toPrecision(9))).size
  if (distinct < degree + 1 || max === min) {
    throw new EngineError('points', 'ill-conditioned', `the reference peaks sit at ${distinct} distinct m/z; a degree-${degree} fit needs ${degree + 1}`)
  }
  const center = (min + max) / 2
  const halfRange = (max - min) / 2
  // Reference peaks bunched within 10 ppm of each other cannot fix a slope for the range.
  if (halfRange / center < 1e-5) {
    throw new EngineError('points', 'ill-conditioned', `the reference peaks span only ${(2 * halfRange / center * 1e6).toFixed(3)} ppm of m/z; spread them over the range`)
  }
  const p = degree + 1
  const n = points.length
  const sqrtW = points.map(pt => (weighted ? 1 / uOf(pt) : 1))
  const design = new Matrix(n, p)
  const weightedDesign = new Matrix(n, p)
  points.forEach((pt, i) => {
    const t = (pt.measuredMz - center) / halfRange
    for (let k = 0; k <= degree; k++) { design.set(i, k, t ** k); weightedDesign.set(i, k, t ** k * sqrtW[i]!) }
  })
  const conditionNumber = new SingularValueDecomposition(design, { computeLeftSingularVectors: false, computeRightSingularVectors: false }).condition
  if (!Number.isFinite(conditionNumber) || conditionNumber > MAX_CONDITION) {
    throw new EngineError('points', 'ill-conditioned', `the fit is ill-conditioned (condition number ${conditionNumber.toExponential(2)}); spread the reference peaks over the range`)
  }
  const target = Matrix.columnVector(points.map((pt, i) => pt.referenceMz * sqrtW[i]!))
  const coefficients = new QrDecomposition(weightedDesign).solve(target).to1DArray()
  const fit = { degree, center, halfRange, coefficients }
  const residuals = points.map(pt => applyCalibration(fit, pt.measuredMz) - pt.referenceMz)
  const residualsPpm = residuals.map((r, i) => r / points[i]!.referenceMz * 1e6)
  const dof = n - p
  const rmsPpm = Math.sqrt(residualsPpm.reduce((s, r) => s + r * r, 0) / dof)
  const normalInverse = inverse(weightedDesign.transpose().mmul(weightedDesign))
  let scale: number
  let chiSquared: number | null = null
  let birgeRatio: number | null = null
  if (weighted) {
    chiSquared = residuals.reduce((s, r, i) => s + (r * sqrtW[i]!) ** 2, 0)
    birgeRatio = Math.sqrt(chiSquared / dof)
    scale = Math.max(1, birgeRatio ** 2)
  }
  else {
    scale = residuals.reduce((s, r) => s + r * r, 0) / dof
  }
  const covariance = normalInverse.mul(scale).to2DArray()
  return { ...fit, residualsPpm, rmsPpm, conditionNumber, weighted, dof, chiSquared, birgeRatio, covariance, range: [min, max], geometryVersion: geometryVersion ?? null }
}

/** Standard uncertainty of the correction at measured m/z x from the coefficients' covariance: √(gᵀCg). */
export function calibrationU(fit: AppliedCalibration, mz: number): number | null {
  const C = fit.covariance
  if (!C) return null
  const t = (mz - fit.center) / fit.halfRange
  const g = fit.coefficients.map((_, k) => t ** k)
  let s = 0
  for (let i = 0; i < g.length; i++) for (let j = 0; j < g.length; j++) s += g[i]! * C[i]![j]! * g[j]!
  return Math.sqrt(Math.max(0, s))
}

/** The measured m/z span the fit covers, with the margin; stored fits of engine 1 span center ± halfRange. */
export function calibratedRange(fit: AppliedCalibration): { from: number, to: number, margin: number } {
  const [lo, hi] = fit.range ?? [fit.center - fit.halfRange, fit.center + fit.halfRange]
  const margin = (hi - lo) * CALIBRATION_MARGIN
  return { from: lo - margin, to: hi + margin, margin }
}

export function applyCalibration(fit: Pick<CalibrationFit, 'center' | 'halfRange' | 'coefficients'>, mz: number): number {
  const t = (mz - fit.center) / fit.halfRange
  let value = 0
  for (let k = fit.coefficients.length - 1; k >= 0; k--) value = value * t + fit.coefficients[k]!
  return value
}

/** Applies a calibration to a whole column in place (Horner's rule, no per-point objects). */
export function applyCalibrationColumn(fit: Pick<CalibrationFit, 'center' | 'halfRange' | 'coefficients'>, mz: Float64Array): Float64Array {
  const c = fit.coefficients
  const inv = 1 / fit.halfRange
  for (let i = 0; i < mz.length; i++) {
    const t = (mz[i]! - fit.center) * inv
    let value = 0
    for (let k = c.length - 1; k >= 0; k--) value = value * t + c[k]!
    mz[i] = value
  }
  return mz
}
