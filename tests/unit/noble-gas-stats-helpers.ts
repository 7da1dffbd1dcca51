// Statistics shared by the noble-gas uncertainty tests (not a test file itself).
//
// Bias: |mean error| < 3·sd(error)/√N, the mean's own standard error times 3 (a 0.3 % false-alarm
// rate under normality; common practice, no source), so that with N = 300 a bias of about 0.17 sd
// is caught (a ½·u rule let 0.45 u through).
// Calibration of u: the mean of z² = (error/u)² against its expectation. With u from ν degrees of
// freedom, z is Student-t and E[z²] = ν/(ν − 2), Var[z²] = 2ν²(ν − 1)/((ν − 2)²(ν − 4)) (ν > 4); with
// u of known σ, N·mean z² is χ²_N (mean 1, variance 2/N). Limits: the χ²_N/N lower limit for ν = ∞
// and the t² upper limit for the smallest ν of the scenario, each at 3.29 of its standard deviation
// (two-sided 0.1 %, normal approximation to the χ² and to the mean of t², N ≥ 300; common practice).
// A u too large by 15 % gives mean z² ≈ 0.76 and a u too small by 15 %, 1.38: both are caught.

export const binomialBand = (pLow: number, pHigh: number, n: number): [number, number] => [
  pLow - 2.576 * Math.sqrt(pLow * (1 - pLow) / n), pHigh + 2.576 * Math.sqrt(pHigh * (1 - pHigh) / n),
]

/** [lower, upper] limits of mean z² over n draws, for u from at least `minDof` degrees of freedom. */
export function zSquareLimits(n: number, minDof: number): [number, number] {
  const lower = 1 - 3.29 * Math.sqrt(2 / n)
  if (!Number.isFinite(minDof)) return [lower, 1 + 3.29 * Math.sqrt(2 / n)]
  if (!(minDof > 4)) throw new Error('mean z² has no finite variance for ν ≤ 4')
  const mean = minDof / (minDof - 2)
  const variance = 2 * minDof * minDof * (minDof - 1) / ((minDof - 2) ** 2 * (minDof - 4))
  return [lower, mean + 3.29 * Math.sqrt(variance / n)]
}

export interface ErrorStats {
  n: number
  meanError: number
  sdError: number
  /** 3·sd(error)/√N: the largest |mean error| the bias rule accepts. */
  biasLimit: number
  meanU: number
  meanZ2: number
  within2u: number
  withinKu: number
  meanK: number
}

export function errorStats(errors: number[], us: number[], ks: number[] = us.map(() => 2)): ErrorStats {
  const n = errors.length
  const mean = (a: number[]) => a.reduce((s, v) => s + v, 0) / a.length
  const meanError = mean(errors)
  const sdError = Math.sqrt(errors.reduce((s, e) => s + (e - meanError) ** 2, 0) / (n - 1))
  const within = (k: (i: number) => number) => errors.filter((e, i) => Math.abs(e) <= k(i) * us[i]!).length / n
  return {
    n, meanError, sdError, biasLimit: 3 * sdError / Math.sqrt(n), meanU: mean(us),
    meanZ2: mean(errors.map((e, i) => (e / us[i]!) ** 2)), within2u: within(() => 2), withinKu: within(i => ks[i]!), meanK: mean(ks),
  }
}
