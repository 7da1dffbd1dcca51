// Small dense least squares for the noble-gas steps (time-zero fits; Student's t is in
// studentT.ts). Ordinary least squares by the normal equations on centred, scaled regressors (two or
// three columns, tens of points: conditioning is not an issue at that size), parameter
// covariance s²·(XᵀX)⁻¹ with s² = SSR/(n − p) (GUM, JCGM 100:2008, H.3; Draper & Smith, Applied
// Regression Analysis, 3rd ed., Wiley 1998, ch. 2).

export interface LinearFit {
  coefficients: number[]
  covariance: number[][]
  dof: number
  /** √(SSR / dof): the residual standard deviation. */
  residualSd: number
  residuals: number[]
}

/** Inverse of a small symmetric positive-definite matrix by Gauss–Jordan elimination; null when singular. */
export function invertSmall(a: number[][]): number[][] | null {
  const n = a.length
  const m = a.map((row, i) => [...row, ...Array.from({ length: n }, (_, j) => (i === j ? 1 : 0))])
  for (let col = 0; col < n; col++) {
    let pivot = col
    for (let r = col + 1; r < n; r++) if (Math.abs(m[r]![col]!) > Math.abs(m[pivot]![col]!)) pivot = r
    const scale = Math.max(...a.map(row => Math.abs(row[col]!)))
    if (!(Math.abs(m[pivot]![col]!) > 1e-12 * scale)) return null
    ;[m[col], m[pivot]] = [m[pivot]!, m[col]!]
    const p = m[col]![col]!
    for (let j = 0; j < 2 * n; j++) m[col]![j]! /= p
    for (let r = 0; r < n; r++) {
      if (r === col) continue
      const f = m[r]![col]!
      if (f !== 0) for (let j = 0; j < 2 * n; j++) m[r]![j]! -= f * m[col]![j]!
    }
  }
  return m.map(row => row.slice(n))
}

/** OLS of y on the columns of X (rows = points). Null when XᵀX is singular or no degree of freedom is left. */
export function leastSquares(X: number[][], y: number[]): LinearFit | null {
  const n = y.length
  const p = X[0]?.length ?? 0
  if (n <= p) return null
  // Columns scaled to unit length first: regressors of 1e-13 A beside 1 would otherwise look singular.
  const norm = Array.from({ length: p }, (_, j) => Math.sqrt(X.reduce((s, row) => s + row[j]! ** 2, 0)))
  if (norm.some(v => !(v > 0) || !Number.isFinite(v))) return null
  const xtx = Array.from({ length: p }, () => new Array<number>(p).fill(0))
  const xty = new Array<number>(p).fill(0)
  for (let i = 0; i < n; i++) {
    const row = X[i]!
    for (let a = 0; a < p; a++) {
      xty[a]! += row[a]! / norm[a]! * y[i]!
      for (let b = 0; b < p; b++) xtx[a]![b]! += row[a]! / norm[a]! * row[b]! / norm[b]!
    }
  }
  const inv = invertSmall(xtx)
  if (!inv) return null
  const coefficients = inv.map((row, a) => row.reduce((s, v, j) => s + v * xty[j]!, 0) / norm[a]!)
  const residuals = y.map((v, i) => v - X[i]!.reduce((s, x, j) => s + x * coefficients[j]!, 0))
  const dof = n - p
  const s2 = residuals.reduce((s, r) => s + r * r, 0) / dof
  return { coefficients, covariance: inv.map((row, a) => row.map((v, b) => v * s2 / (norm[a]! * norm[b]!))), dof, residualSd: Math.sqrt(s2), residuals }
}
