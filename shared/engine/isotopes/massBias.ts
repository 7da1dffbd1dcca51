import { EngineError } from '../errors'
import { isotope } from '../species'
import type { MaterialValues, Measured } from './types'

// Instrumental mass bias (mass discrimination) of a ratio R = n/d of isotopes of masses m_n, m_d.
// Every law is written as the factor K that turns the measured ratio into the true one,
// R_true = R_meas · K, with K fixed by the measured and the known value of a reference ratio
// a/b of the same element (x = R_known / R_measured of that ratio):
//   linear       K = 1 + ε·Δm                  ε = (x − 1) / Δm_ab
//   power        K = (1 + ε)^Δm                ε = x^(1/Δm_ab) − 1
//   exponential  K = (m_n / m_d)^β             β = ln x / ln(m_a / m_b)
// with Δm = m_n − m_d. Convention of the linear law: (1 + ε·Δm) multiplies the measured ratio to give
// the true one; the other convention, R_meas = R_true·(1 + ε'·Δm), has ε' ≈ −ε and parts from this one
// at second order in ε·Δm. The linear and power laws: Russell, Papanastassiou & Tombrello, Geochim.
// Cosmochim. Acta 42 (1978) 1075; the exponential law: the same paper, and Wasserburg, Jacobsen,
// DePaolo, McCulloch & Wen, Geochim. Cosmochim. Acta 45 (1981) 2311. Masses are the AME2020
// atomic masses of the engine's isotope table (shared/engine/species.ts), never nominal masses.
//
// Written through x, every law is K = h(x) with e = ∂ln K/∂ln x:
//   linear: K = 1 + (x − 1)·Δm/Δm_ab, e = x·(Δm/Δm_ab)/K; power: ln K = ln x·Δm/Δm_ab, e = Δm/Δm_ab;
//   exponential: ln K = ln x·ln(m_n/m_d)/ln(m_a/m_b), e = ln(m_n/m_d)/ln(m_a/m_b).
// First-order propagation in relative terms (GUM, JCGM 100:2008, 5.2.2, with covariances):
//   u_rel²(R_true) = u_rel²(R_meas) + e²·[u_rel²(R_known) + u_rel²(R_ref,meas)] − 2e·cov_rel(R_meas, R_ref,meas)
// where the covariance exists when both ratios were measured in the same acquisition (internal
// normalisation). Ratios computed from processed beams share the denominator beam: cov_rel =
// u_rel²(d). Ratios an acquisition states as means over static cycles get it from the cycles
// themselves (GUM 5.2.3, eq. 17; cycleRatioCorrelation below): in static vacuum a beam's scatter
// over the cycles is mostly its decay with time, which the ratios do not share.

export type MassBiasLaw = 'linear' | 'power' | 'exponential'

export const MASS_BIAS_SOURCES: Record<MassBiasLaw, string> = {
  linear: 'linear law: Russell, Papanastassiou & Tombrello, Geochim. Cosmochim. Acta 42 (1978) 1075',
  power: 'power law: Russell, Papanastassiou & Tombrello, Geochim. Cosmochim. Acta 42 (1978) 1075',
  exponential: 'exponential law: Russell et al., Geochim. Cosmochim. Acta 42 (1978) 1075; Wasserburg et al., Geochim. Cosmochim. Acta 45 (1981) 2311',
}

/**
 * Atmospheric argon, Lee, Marti, Severinghaus, Kawamura, Yoo, Lee & Kim, Geochim. Cosmochim.
 * Acta 70 (2006) 4507: 40Ar/36Ar = 298.56 ± 0.31, 38Ar/36Ar = 0.1885 ± 0.0003 (values typed
 * from memory; the ± taken as standard uncertainties).
 */
export const ATMOSPHERIC_ARGON: MaterialValues = {
  id: 'AIR-Ar',
  name: 'Atmospheric argon',
  values: { '40Ar/36Ar': { value: 298.56, u: 0.31 }, '38Ar/36Ar': { value: 0.1885, u: 0.0003 } },
  source: 'Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507 (values from memory)',
}

/** A ratio of two isotopes by their labels, with AME2020 masses. */
export interface IsotopeRatio { numerator: string, denominator: string, mNum: number, mDen: number }

/** "40/36" of argon → 40Ar over 36Ar with their atomic masses (AME2020 through chemical-elements). */
export function isotopeRatio(key: string, element: string, field = 'ratio'): IsotopeRatio {
  const parts = key.split('/')
  if (parts.length !== 2 || !/^\d{1,3}$/.test(parts[0]!) || !/^\d{1,3}$/.test(parts[1]!)) {
    throw new EngineError(field, 'bad-ratio', `"${key}" is not a ratio of nominal masses like "40/36"`)
  }
  const numerator = `${parts[0]}${element}`
  const denominator = `${parts[1]}${element}`
  try {
    return { numerator, denominator, mNum: isotope(numerator).mass, mDen: isotope(denominator).mass }
  }
  catch {
    throw new EngineError(field, 'unknown-isotope', `"${key}" names an isotope of ${element} the mass table does not have`)
  }
}

/** The law's parameter (ε per u for linear and power, β for exponential) from x = R_known/R_meas of ratio `ref`. */
export function fractionationParameter(law: MassBiasLaw, x: number, ref: IsotopeRatio): number {
  const dm = ref.mNum - ref.mDen
  if (law === 'linear') return (x - 1) / dm
  if (law === 'power') return x ** (1 / dm) - 1
  return Math.log(x) / Math.log(ref.mNum / ref.mDen)
}

/** The factor K of ratio `target` from the law's parameter. */
export function correctionFactor(law: MassBiasLaw, parameter: number, target: IsotopeRatio): number {
  const dm = target.mNum - target.mDen
  if (law === 'linear') return 1 + parameter * dm
  if (law === 'power') return (1 + parameter) ** dm
  return (target.mNum / target.mDen) ** parameter
}

/** K of `target` and its sensitivity e = ∂ln K/∂ln x, for x = R_known/R_meas of `ref`. */
export function factorFromReference(law: MassBiasLaw, x: number, ref: IsotopeRatio, target: IsotopeRatio): { factor: number, sensitivity: number } {
  const factor = correctionFactor(law, fractionationParameter(law, x, ref), target)
  const massRatio = (target.mNum - target.mDen) / (ref.mNum - ref.mDen)
  if (law === 'linear') return { factor, sensitivity: x * massRatio / factor }
  if (law === 'power') return { factor, sensitivity: massRatio }
  return { factor, sensitivity: Math.log(target.mNum / target.mDen) / Math.log(ref.mNum / ref.mDen) }
}

/** The law's parameter with its standard uncertainty from one measurement of a reference ratio of known value. */
export function fractionationFromReference(law: MassBiasLaw, measured: Measured, known: Measured, ref: IsotopeRatio): Measured {
  const x = known.value / measured.value
  const uLnX = Math.hypot(known.u / known.value, measured.u / measured.value)
  // ∂p/∂ln x: linear x/Δm, power x^(1/Δm)/Δm, exponential 1/ln(m_a/m_b).
  const dm = ref.mNum - ref.mDen
  const slope = law === 'linear' ? x / dm : law === 'power' ? x ** (1 / dm) / dm : 1 / Math.log(ref.mNum / ref.mDen)
  return { value: fractionationParameter(law, x, ref), u: Math.abs(slope) * uLnX }
}

export interface CorrectionInput {
  law: MassBiasLaw
  /** The ratio to correct, as measured. */
  measured: Measured
  target: IsotopeRatio
  /** The reference ratio as measured (same acquisition for internal normalisation, or the standard's). */
  referenceMeasured: Measured
  referenceKnown: Measured
  ref: IsotopeRatio
  /** cov(ln R_measured, ln R_ref,measured): the shared denominator's u_rel² when measured together, else 0. */
  relativeCovariance?: number
}

/** R_true = R_meas · K with u propagated (GUM 5.2.2, including the covariance through the shared denominator). */
export function correctRatio(c: CorrectionInput): Measured & { factor: number, sensitivity: number } {
  const x = c.referenceKnown.value / c.referenceMeasured.value
  const { factor, sensitivity: e } = factorFromReference(c.law, x, c.ref, c.target)
  const value = c.measured.value * factor
  const relVar = (c.measured.u / c.measured.value) ** 2
    + e * e * ((c.referenceKnown.u / c.referenceKnown.value) ** 2 + (c.referenceMeasured.u / c.referenceMeasured.value) ** 2)
    - 2 * e * (c.relativeCovariance ?? 0)
  return { value, u: Math.abs(value) * Math.sqrt(Math.max(relVar, 0)), factor, sensitivity: e }
}

/**
 * Relative covariance of two ratios over the same denominator beam, from the beams' standard
 * uncertainties: cov(ln n1/d, ln n2/d) = u_rel²(d) for independent beams (GUM 5.2.2). Zero when
 * the denominators differ or the denominator beam is unknown.
 */
export function sharedDenominatorCovariance(a: string, b: string, beams: Record<string, Measured>): number {
  const [, da] = a.split('/')
  const [, db] = b.split('/')
  if (da === undefined || da !== db) return 0
  const beam = Object.hasOwn(beams, da) ? beams[da] : undefined
  if (!beam || !(beam.value !== 0)) return 0
  return (beam.u / beam.value) ** 2
}

/**
 * Correlation of two ratios stated as means over the same static cycles, from the cycles' own
 * ratios: r = s(ā, b̄)/(s(ā)·s(b̄)) with s(ā, b̄) = Σ(a_k − ā)(b_k − b̄)/(n(n − 1)) (GUM, JCGM 100:2008,
 * 5.2.3, eq. 17 and C.3.6). Null when fewer than 3 cycles carry both ratios' beams.
 */
export function cycleRatioCorrelation(a: string, b: string, cycles: readonly { beams: Record<string, number> }[]): number | null {
  const [na, da] = a.split('/') as [string, string]
  const [nb, db] = b.split('/') as [string, string]
  const pairs: [number, number][] = []
  for (const c of cycles) {
    const ra = c.beams[na]! / c.beams[da]!
    const rb = c.beams[nb]! / c.beams[db]!
    if (Number.isFinite(ra) && Number.isFinite(rb)) pairs.push([ra, rb])
  }
  if (pairs.length < 3) return null
  const ma = pairs.reduce((s, p) => s + p[0], 0) / pairs.length
  const mb = pairs.reduce((s, p) => s + p[1], 0) / pairs.length
  let sab = 0
  let saa = 0
  let sbb = 0
  for (const [x, y] of pairs) { sab += (x - ma) * (y - mb); saa += (x - ma) ** 2; sbb += (y - mb) ** 2 }
  return saa > 0 && sbb > 0 ? sab / Math.sqrt(saa * sbb) : null
}
