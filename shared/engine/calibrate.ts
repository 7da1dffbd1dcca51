import { Matrix, QrDecomposition, SingularValueDecomposition } from 'ml-matrix'
import { EngineError } from './errors'

// Calibration: from reference peaks of known m/z, a least-squares polynomial (degree 1..3)
// from the m/z the geometry gives to the true m/z. The variable is centred and scaled to
// [-1, 1] before fitting, which keeps the normal problem well conditioned; a fit that is
// still ill-conditioned (reference points bunched together) is refused, not returned.

export interface CalibrationPoint { measuredMz: number, referenceMz: number, label?: string }

export interface CalibrationFit {
  degree: number
  center: number
  halfRange: number
  /** Coefficients of t⁰..tᵈ with t = (mz − center) / halfRange. */
  coefficients: number[]
  residualsPpm: number[]
  rmsPpm: number
  conditionNumber: number
}

const MAX_CONDITION = 1e8 // refuse beyond this (common practice, no source)

export function fitCalibration(points: CalibrationPoint[], degree: number): CalibrationFit {
  if (!Number.isInteger(degree) || degree < 1 || degree > 3) throw new EngineError('degree', 'out-of-range', 'must be 1, 2 or 3')
  points.forEach((p, i) => {
    if (!Number.isFinite(p.measuredMz) || p.measuredMz <= 0) throw new EngineError(`points[${i}].measuredMz`, 'not-positive', 'must be a positive m/z')
    if (!Number.isFinite(p.referenceMz) || p.referenceMz <= 0) throw new EngineError(`points[${i}].referenceMz`, 'not-positive', 'must be a positive m/z')
  })
  // One point more than coefficients, so that residuals say something about the fit.
  if (points.length < degree + 2) {
    throw new EngineError('points', 'too-few', `a degree-${degree} fit needs at least ${degree + 2} reference peaks, got ${points.length}`)
  }
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
  const design = new Matrix(points.length, degree + 1)
  points.forEach((p, i) => {
    const t = (p.measuredMz - center) / halfRange
    for (let k = 0; k <= degree; k++) design.set(i, k, t ** k)
  })
  const conditionNumber = new SingularValueDecomposition(design, { computeLeftSingularVectors: false, computeRightSingularVectors: false }).condition
  if (!Number.isFinite(conditionNumber) || conditionNumber > MAX_CONDITION) {
    throw new EngineError('points', 'ill-conditioned', `the fit is ill-conditioned (condition number ${conditionNumber.toExponential(2)}); spread the reference peaks over the range`)
  }
  const target = Matrix.columnVector(points.map(p => p.referenceMz))
  const solution = new QrDecomposition(design).solve(target)
  const coefficients = solution.to1DArray()
  const fit = { degree, center, halfRange, coefficients }
  const residualsPpm = points.map(p => (applyCalibration(fit, p.measuredMz) - p.referenceMz) / p.referenceMz * 1e6)
  const rmsPpm = Math.sqrt(residualsPpm.reduce((s, r) => s + r * r, 0) / residualsPpm.length)
  return { ...fit, residualsPpm, rmsPpm, conditionNumber }
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
