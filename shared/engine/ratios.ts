import { EngineError } from './errors'
import type { CycleStatistics } from './static'
import { propagate } from './uncertainty'

// Reference materials and their accepted isotope ratios with the standard uncertainty the
// source states. Values from memory of the cited publications; the reference tests name the
// same sources.
export const referenceRatios = {
  // VPDB: 13C/12C = 0.0111802(28) (Werner & Brand, Rapid Commun. Mass Spectrom. 15 (2001) 501; from memory)
  'VPDB:13C/12C': { standard: 'VPDB', heavy: '13C', light: '12C', ratio: 0.0111802, ratioU: 0.0000028, delta: 'δ13C', source: 'Werner & Brand, Rapid Commun. Mass Spectrom. 15 (2001) 501' },
  // VPDB: 18O/16O = 0.0020672(21) (Werner & Brand 2001; from memory)
  'VPDB:18O/16O': { standard: 'VPDB', heavy: '18O', light: '16O', ratio: 0.0020672, ratioU: 0.0000021, delta: 'δ18O', source: 'Werner & Brand, Rapid Commun. Mass Spectrom. 15 (2001) 501' },
  // VSMOW: 2H/1H = 155.76(5)e-6 (Hagemann et al., Tellus 22 (1970) 712; from memory)
  'VSMOW:2H/1H': { standard: 'VSMOW', heavy: '2H', light: '1H', ratio: 155.76e-6, ratioU: 0.05e-6, delta: 'δ2H', source: 'Hagemann et al., Tellus 22 (1970) 712' },
  // VSMOW: 18O/16O = 2005.20(43)e-6 (Baertschi, Earth Planet. Sci. Lett. 31 (1976) 341; from memory)
  'VSMOW:18O/16O': { standard: 'VSMOW', heavy: '18O', light: '16O', ratio: 2005.20e-6, ratioU: 0.43e-6, delta: 'δ18O', source: 'Baertschi, Earth Planet. Sci. Lett. 31 (1976) 341' },
  // Air N2: 14N/15N = 272.0(3), so 15N/14N = 0.0036765(41) (Junk & Svec, Geochim. Cosmochim. Acta 14 (1958) 234; from memory)
  'AIR:15N/14N': { standard: 'AIR', heavy: '15N', light: '14N', ratio: 0.0036765, ratioU: 0.0000041, delta: 'δ15N', source: 'Junk & Svec, Geochim. Cosmochim. Acta 14 (1958) 234' },
  // Air argon: 40Ar/36Ar = 298.56(31) (Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507); from memory
  'AIR:40Ar/36Ar': { standard: 'AIR', heavy: '40Ar', light: '36Ar', ratio: 298.56, ratioU: 0.31, delta: 'δ40Ar', source: 'Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507' },
} as const

export type ReferenceRatioId = keyof typeof referenceRatios

export interface RatioResult {
  id: ReferenceRatioId
  numerator: string
  denominator: string
  ratio: number
  ratioU: number
  standard: string
  deltaName: string
  /** δ in per mil against the standard, with its standard uncertainty (of the measured ratio alone). */
  deltaPermil: number
  deltaU: number
  /** The standard's accepted ratio, its standard uncertainty and where it is published. */
  referenceRatio: number
  referenceRatioU: number
  referenceSource: string
  /**
   * u(δ) when the measured ratio is read as an absolute ratio against the published one, so
   * the reference value's own uncertainty adds in.
   */
  deltaUWithReference: number
  /** Static readings: the cycle statistics the ratio comes from. */
  cycles?: CycleStatistics
  /** On request (`monteCarlo`), for a ratio of two profile peaks: its GUM-S1 95 % coverage interval. */
  coverage?: RatioCoverage
}

/** A ratio's coverage interval by the Monte Carlo method of GUM Supplement 1 (JCGM 101:2008). */
export interface RatioCoverage {
  method: 'GUM-S1 Monte Carlo (JCGM 101:2008)'
  /** Coverage probability. */
  p: number
  /** Probabilistically symmetric interval (JCGM 101 7.7.1) of the ratio, and of δ in ‰. */
  interval: [number, number]
  deltaInterval: [number, number]
  /** Half the interval's width, and k = U / u with u the standard deviation of the trials. */
  expandedU: number
  k: number
  /** Monte Carlo trials: M = 10^4/(1 − p) = 2·10^5, the least JCGM 101 7.2.2 asks for (from memory). */
  trials: number
}

/**
 * Ratio of two peak areas and its δ against a reference material:
 * δ = (R_sample / R_standard − 1) · 1000 ‰, uncertainty propagated per the GUM.
 */
export function ratioAndDelta(id: ReferenceRatioId, heavy: { area: number, areaU: number }, light: { area: number, areaU: number }, covariance = 0): RatioResult {
  const ref = referenceRatios[id]
  if (!(light.area > 0)) throw new EngineError(`ratios.${id}`, 'no-signal', `the ${ref.light} peak has no area`)
  const ratio = propagate(([h, l]) => h! / l!, [{ value: heavy.area, u: heavy.areaU }, { value: light.area, u: light.areaU }])
  // Correlated inputs (GUM 5.2.2): u²(R) = u²(R)|uncorrelated + 2 (∂R/∂h)(∂R/∂l) cov(h, l),
  // with ∂R/∂h = 1/l and ∂R/∂l = −h/l².
  const ratioU = Math.sqrt(Math.max(0, ratio.u ** 2 - 2 * covariance * heavy.area / light.area ** 3))
  const deltaU = 1000 * ratioU / ref.ratio
  return {
    id, numerator: ref.heavy, denominator: ref.light, ratio: ratio.value, ratioU,
    standard: ref.standard, deltaName: ref.delta, deltaPermil: deltaPermil(ratio.value, ref.ratio), deltaU,
    referenceRatio: ref.ratio, referenceRatioU: ref.ratioU, referenceSource: ref.source,
    deltaUWithReference: Math.hypot(deltaU, 1000 * ratio.value / ref.ratio ** 2 * ref.ratioU),
  }
}

/** δ (‰) of a ratio against a standard ratio. */
export function deltaPermil(sampleRatio: number, standardRatio: number): number {
  return (sampleRatio / standardRatio - 1) * 1000
}
