import { EngineError } from '../errors'

// Straight lines through points with uncertainties: y = a + b·x.

export interface LineFit {
  intercept: number
  slope: number
  uIntercept: number
  uSlope: number
  /** cov(a, b). */
  covariance: number
  /** Σ of squared weighted residuals and its degrees of freedom (n − 2). */
  chi2: number
  dof: number
}

/**
 * Weighted least squares of y on x with exact x (weights 1/u_y²): the normal equations and
 * their inverse as the parameters' covariance (Bevington & Robinson, Data Reduction and Error
 * Analysis, 3rd ed. 2003, §6.4; from memory). Used for drift and the H3+ factor, whose x
 * (time, position, beam intensity) are known far better than y.
 */
export function weightedLine(x: number[], y: number[], uy: number[]): LineFit {
  const n = x.length
  if (n < 2) throw new EngineError('points', 'too-few', 'a line needs at least two points')
  let S = 0, Sx = 0, Sy = 0, Sxx = 0, Sxy = 0
  for (let i = 0; i < n; i++) {
    const w = 1 / uy[i]! ** 2
    S += w; Sx += w * x[i]!; Sy += w * y[i]!; Sxx += w * x[i]! ** 2; Sxy += w * x[i]! * y[i]!
  }
  const D = S * Sxx - Sx * Sx
  if (!(Math.abs(D) > 1e-12 * S * Sxx)) throw new EngineError('points', 'degenerate', 'the points share one x: no slope can be fitted')
  const a = (Sxx * Sy - Sx * Sxy) / D
  const b = (S * Sxy - Sx * Sy) / D
  let chi2 = 0
  for (let i = 0; i < n; i++) chi2 += ((y[i]! - a - b * x[i]!) / uy[i]!) ** 2
  return { intercept: a, slope: b, uIntercept: Math.sqrt(Sxx / D), uSlope: Math.sqrt(S / D), covariance: -Sx / D, chi2, dof: n - 2 }
}

/**
 * The best straight line with errors in both x and y (uncorrelated within a point):
 * York, Evensen, López Martínez & De Basabe Delgado, Am. J. Phys. 72 (2004) 367, the
 * iterative solution of their section III with the standard errors and cov(a, b) of their
 * eqs. 13 (from memory). Chosen over a GUM-propagated OLS because the anchors' accepted
 * values carry uncertainties of the same order as their measurement (SLAP2 ±0.3 ‰, USGS32
 * ±1 ‰): the fit weights each anchor by both, and its covariance carries both into the
 * samples. For two points it passes through both, as two-point normalisation does.
 */
export function yorkFit(x: number[], ux: number[], y: number[], uy: number[]): LineFit {
  const n = x.length
  if (n < 2) throw new EngineError('points', 'too-few', 'a line needs at least two points')
  // A zero u would give an infinite weight; a floor far below any real u keeps the sums finite.
  const floor = 1e-9
  const wx = ux.map(u => 1 / Math.max(u, floor) ** 2)
  const wy = uy.map(u => 1 / Math.max(u, floor) ** 2)
  let b = initialSlope(x, y)
  let W: number[] = [], beta: number[] = [], xBar = 0, yBar = 0
  for (let iter = 0; iter < 100; iter++) {
    W = wx.map((w, i) => w * wy[i]! / (w + b * b * wy[i]!))
    const sW = W.reduce((s, v) => s + v, 0)
    xBar = W.reduce((s, w, i) => s + w * x[i]!, 0) / sW
    yBar = W.reduce((s, w, i) => s + w * y[i]!, 0) / sW
    beta = W.map((w, i) => w * ((x[i]! - xBar) / wy[i]! + b * (y[i]! - yBar) / wx[i]!))
    let num = 0, den = 0
    for (let i = 0; i < n; i++) { num += W[i]! * beta[i]! * (y[i]! - yBar); den += W[i]! * beta[i]! * (x[i]! - xBar) }
    if (!(Math.abs(den) > 0)) throw new EngineError('points', 'degenerate', 'the points share one x: no slope can be fitted')
    const next = num / den
    const done = Math.abs(next - b) <= 1e-15 * Math.max(1, Math.abs(b))
    b = next
    if (done) break
  }
  const a = yBar - b * xBar
  // York 2004 eq. 13: adjusted x_i = x̄ + β_i, their weighted mean and spread give σ_b.
  const sW = W.reduce((s, v) => s + v, 0)
  const adj = beta.map(v => xBar + v)
  const adjBar = W.reduce((s, w, i) => s + w * adj[i]!, 0) / sW
  const sU = W.reduce((s, w, i) => s + w * (adj[i]! - adjBar) ** 2, 0)
  const varB = 1 / sU
  const varA = 1 / sW + adjBar * adjBar * varB
  let chi2 = 0
  for (let i = 0; i < n; i++) chi2 += W[i]! * (y[i]! - b * x[i]! - a) ** 2
  return { intercept: a, slope: b, uIntercept: Math.sqrt(varA), uSlope: Math.sqrt(varB), covariance: -adjBar * varB, chi2, dof: n - 2 }
}

function initialSlope(x: number[], y: number[]): number {
  const n = x.length
  const mx = x.reduce((s, v) => s + v, 0) / n
  const my = y.reduce((s, v) => s + v, 0) / n
  let sxy = 0, sxx = 0
  for (let i = 0; i < n; i++) { sxy += (x[i]! - mx) * (y[i]! - my); sxx += (x[i]! - mx) ** 2 }
  if (!(sxx > 0)) throw new EngineError('points', 'degenerate', 'the points share one x: no slope can be fitted')
  return sxy / sxx
}

/** Weighted mean with its internal standard uncertainty 1/√Σw (GUM 4.2; Bevington §4.1). */
export function weightedMean(values: { value: number, u: number }[]): { value: number, u: number, chi2: number } {
  const w = values.map(v => 1 / Math.max(v.u, 1e-12) ** 2)
  const sw = w.reduce((s, v) => s + v, 0)
  const mean = values.reduce((s, v, i) => s + w[i]! * v.value, 0) / sw
  const chi2 = values.reduce((s, v, i) => s + w[i]! * (v.value - mean) ** 2, 0)
  return { value: mean, u: 1 / Math.sqrt(sw), chi2 }
}
