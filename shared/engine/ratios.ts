import { EngineError } from './errors'
import type { CycleStatistics } from './static'
import { propagate } from './uncertainty'

// Reference materials and their accepted isotope ratios. Values from memory of the cited
// publications; the reference tests name the same sources.
export const referenceRatios = {
  // VPDB: 13C/12C = 0.0111802 (Werner & Brand, Rapid Commun. Mass Spectrom. 15 (2001) 501; from memory)
  'VPDB:13C/12C': { standard: 'VPDB', heavy: '13C', light: '12C', ratio: 0.0111802, delta: 'δ13C' },
  // VPDB: 18O/16O = 0.0020672 (Werner & Brand 2001; from memory)
  'VPDB:18O/16O': { standard: 'VPDB', heavy: '18O', light: '16O', ratio: 0.0020672, delta: 'δ18O' },
  // VSMOW: 2H/1H = 155.76e-6 (Hagemann et al., Tellus 22 (1970) 712; from memory)
  'VSMOW:2H/1H': { standard: 'VSMOW', heavy: '2H', light: '1H', ratio: 155.76e-6, delta: 'δ2H' },
  // VSMOW: 18O/16O = 2005.20e-6 (Baertschi, Earth Planet. Sci. Lett. 31 (1976) 341; from memory)
  'VSMOW:18O/16O': { standard: 'VSMOW', heavy: '18O', light: '16O', ratio: 2005.20e-6, delta: 'δ18O' },
  // Air N2: 15N/14N = 1/272 = 0.0036765 (Junk & Svec, Geochim. Cosmochim. Acta 14 (1958) 234; from memory)
  'AIR:15N/14N': { standard: 'AIR', heavy: '15N', light: '14N', ratio: 0.0036765, delta: 'δ15N' },
  // Air argon: 40Ar/36Ar = 298.56 (Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507; from memory)
  'AIR:40Ar/36Ar': { standard: 'AIR', heavy: '40Ar', light: '36Ar', ratio: 298.56, delta: 'δ40Ar' },
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
  /** δ in per mil against the standard, with its standard uncertainty. */
  deltaPermil: number
  deltaU: number
  /** Static readings: the cycle statistics the ratio comes from. */
  cycles?: CycleStatistics
}

/**
 * Ratio of two peak areas and its δ against a reference material:
 * δ = (R_sample / R_standard − 1) · 1000 ‰, uncertainty propagated per the GUM.
 */
export function ratioAndDelta(id: ReferenceRatioId, heavy: { area: number, areaU: number }, light: { area: number, areaU: number }): RatioResult {
  const ref = referenceRatios[id]
  if (!(light.area > 0)) throw new EngineError(`ratios.${id}`, 'no-signal', `the ${ref.light} peak has no area`)
  const ratio = propagate(([h, l]) => h! / l!, [{ value: heavy.area, u: heavy.areaU }, { value: light.area, u: light.areaU }])
  const delta = propagate(([h, l]) => (h! / l! / ref.ratio - 1) * 1000, [{ value: heavy.area, u: heavy.areaU }, { value: light.area, u: light.areaU }])
  return {
    id, numerator: ref.heavy, denominator: ref.light, ratio: ratio.value, ratioU: ratio.u,
    standard: ref.standard, deltaName: ref.delta, deltaPermil: delta.value, deltaU: delta.u,
  }
}

/** δ (‰) of a ratio against a standard ratio. */
export function deltaPermil(sampleRatio: number, standardRatio: number): number {
  return (sampleRatio / standardRatio - 1) * 1000
}
