// Small dense least squares and Student's t for the noble-gas steps (time-zero fits, coverage
// factors). Ordinary least squares by the normal equations on centred, scaled regressors (two or
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

/** ln Γ(x) by Lanczos' approximation (g = 7, n = 9; Press et al., Numerical Recipes, 3rd ed., CUP 2007, §6.1). */
function lnGamma(x: number): number {
  const c = [0.9999999999998099, 676.5203681218851, -1259.1392167224028, 771.3234287776531,
    -176.61503916999186, 12.507343278686905, -0.13857109526572012, 9.984369578019572e-6, 1.5056327351493116e-7]
  if (x < 0.5) return Math.log(Math.PI / Math.sin(Math.PI * x)) - lnGamma(1 - x)
  const z = x - 1
  let a = c[0]!
  const t = z + 7.5
  for (let i = 1; i < 9; i++) a += c[i]! / (z + i)
  return 0.5 * Math.log(2 * Math.PI) + (z + 0.5) * Math.log(t) - t + Math.log(a)
}

/** Regularised incomplete beta I_x(a, b) by its continued fraction (Numerical Recipes, 3rd ed., §6.4). */
function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0
  if (x >= 1) return 1
  const front = Math.exp(lnGamma(a + b) - lnGamma(a) - lnGamma(b) + a * Math.log(x) + b * Math.log(1 - x))
  if (x > (a + 1) / (a + b + 2)) return 1 - incompleteBeta(1 - x, b, a)
  let c = 1
  let d = 1 - (a + b) * x / (a + 1)
  if (Math.abs(d) < 1e-300) d = 1e-300
  d = 1 / d
  let h = d
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m
    let aa = m * (b - m) * x / ((a + m2 - 1) * (a + m2))
    d = 1 + aa * d; if (Math.abs(d) < 1e-300) d = 1e-300
    c = 1 + aa / c; if (Math.abs(c) < 1e-300) c = 1e-300
    d = 1 / d; h *= d * c
    aa = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1))
    d = 1 + aa * d; if (Math.abs(d) < 1e-300) d = 1e-300
    c = 1 + aa / c; if (Math.abs(c) < 1e-300) c = 1e-300
    d = 1 / d
    const delta = d * c
    h *= delta
    if (Math.abs(delta - 1) < 1e-15) break
  }
  return front * h / a
}

/** P(|T| ≤ t) for Student's t with ν degrees of freedom: 1 − I_{ν/(ν+t²)}(ν/2, 1/2). */
export function studentTCentral(t: number, dof: number): number {
  return 1 - incompleteBeta(dof / (dof + t * t), dof / 2, 0.5)
}

/** The two-sided coverage factor k with P(|T_ν| ≤ k) = p (GUM G.3.4; bisection). */
export function studentTCoverageFactor(dof: number, p = 0.95): number {
  // Beyond 10^6 degrees of freedom t is the normal distribution to better than 10^-6.
  const nu = Number.isFinite(dof) ? Math.min(dof, 1e6) : 1e6
  let lo = 0
  let hi = 1000
  for (let i = 0; i < 100; i++) {
    const mid = (lo + hi) / 2
    if (studentTCentral(mid, nu) < p) lo = mid
    else hi = mid
  }
  return (lo + hi) / 2
}

