// Student's t coverage factor for a Type A component with few degrees of freedom (GUM JCGM
// 100:2008 G.3, G.4: k = t_p(ν_eff) with ν_eff by Welch–Satterthwaite). The t distribution's
// CDF through the regularised incomplete beta function, I_x(a, b) by its continued fraction
// (Press et al., Numerical Recipes, 3rd ed. 2007, §6.4; from memory), ln Γ by Lanczos's series
// (the same book, §6.1, g = 5, six coefficients; from memory).

const LANCZOS = [76.18009172947146, -86.50532032941678, 24.01409824083091, -1.231739572450155, 0.001208650973866179, -0.5395239384953e-5]

function lnGamma(x: number): number {
  let y = x
  const tmp = x + 5.5 - (x + 0.5) * Math.log(x + 5.5)
  let ser = 1.000000000190015
  for (const c of LANCZOS) ser += c / ++y
  return -tmp + Math.log(2.5066282746310002 * ser / x)
}

function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300
  let c = 1
  let d = 1 - (a + b) * x / (a + 1)
  if (Math.abs(d) < tiny) d = tiny
  d = 1 / d
  let h = d
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m
    let aa = m * (b - m) * x / ((a + m2 - 1) * (a + m2))
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny
    d = 1 / d; h *= d * c
    aa = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1))
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny
    d = 1 / d
    const del = d * c
    h *= del
    if (Math.abs(del - 1) < 1e-14) break
  }
  return h
}

/** Regularised incomplete beta I_x(a, b). */
function incompleteBeta(a: number, b: number, x: number): number {
  if (x <= 0) return 0
  if (x >= 1) return 1
  const front = Math.exp(lnGamma(a + b) - lnGamma(a) - lnGamma(b) + a * Math.log(x) + b * Math.log(1 - x))
  return x < (a + 1) / (a + b + 2) ? front * betaContinuedFraction(a, b, x) / a : 1 - front * betaContinuedFraction(b, a, 1 - x) / b
}

/** P(|T| ≤ t) for Student's t with ν degrees of freedom. */
export function studentTCentral(t: number, dof: number): number {
  return 1 - incompleteBeta(dof / 2, 0.5, dof / (dof + t * t))
}

/**
 * The coverage factor k with P(|T_ν| ≤ k) = p; p = 0.9545 by default, the level of k = 2 for
 * a normal output (GUM G.3.4, Table G.2). ν above 1e6 (or infinite): the normal's quantile.
 */
export function coverageFactor(dof: number, p = 0.9545): number {
  if (!(dof > 0)) return Number.POSITIVE_INFINITY
  let lo = 0
  let hi = dof > 1e6 ? 10 : 1000
  for (let i = 0; i < 200; i++) {
    const mid = (lo + hi) / 2
    if (studentTCentral(mid, Math.min(dof, 1e7)) < p) lo = mid
    else hi = mid
    if (hi - lo < 1e-10) break
  }
  return (lo + hi) / 2
}
