import { EngineError } from '../errors'
import { referenceRatios } from '../ratios'
import type { MaterialValues, Measured } from './types'

// International reference materials and the scales they realise. Every value was typed from
// memory of the cited reference sheet or paper (no network here): each entry says so, and the
// registry test repeats the value beside the same source so a reviewer checks both at once.
// Ids are stable strings: methods, sequences and the API name materials by them.

/** The scale each δ quantity is reported on, unless a method says otherwise (δ18O of CO2). */
export const quantityScales: Record<string, string> = { 'δ13C': 'VPDB', 'δ15N': 'AIR', 'δ2H': 'VSMOW', 'δ18O': 'VSMOW', 'δ17O': 'VSMOW', 'δ18O_VPDB': 'VPDB' }

/** Absolute isotope ratios of the scales' zero points (each with its source; all from memory). */
export const scaleRatios = {
  /**
   * The IUPAC 17O-correction set for CO2 (Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010)
   * 1719, from memory): 13R of VPDB, 18R of VPDB-CO2 (CO2 evolved from VPDB at 25 °C), and the
   * 17O parameters K and λ as the paper states them.
   */
  'VPDB-CO2': { '13R': 0.011180, '18R': 0.002088349, K: 0.01022461, lambda: 0.528, source: 'Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719' },
  /** VSMOW: 18R Baertschi (1976), 17R Li et al. (1988), 2R Hagemann et al. (1970) (from memory). */
  VSMOW: { '2R': referenceRatios['VSMOW:2H/1H'].ratio, '18R': referenceRatios['VSMOW:18O/16O'].ratio, '17R': 0.0003799, source: 'Baertschi, EPSL 31 (1976) 341; Li et al., Chin. Sci. Bull. 33 (1988) 1610; Hagemann et al., Tellus 22 (1970) 712' },
  /** Atmospheric N2, 15N/14N (Junk & Svec, GCA 14 (1958) 234; from memory). */
  AIR: { '15R': referenceRatios['AIR:15N/14N'].ratio, source: referenceRatios['AIR:15N/14N'].source },
} as const

/**
 * δ18O on VSMOW from δ18O on VPDB: δ_VSMOW = 1.03092·δ_VPDB + 30.92 ‰ (Brand, Coplen, Vogl,
 * Rosner & Prohaska, Pure Appl. Chem. 86 (2014) 425; Kim, Coplen & Horita, Geochim. Cosmochim.
 * Acta 158 (2015) 276; from memory). Coplen, Kendall & Hopple, Nature 302 (1983) 236 gave the
 * older 1.03091 and 30.91.
 */
export const VPDB_TO_VSMOW_18O = { factor: 1.03092, offset: 30.92, source: 'Brand et al., Pure Appl. Chem. 86 (2014) 425; Kim, Coplen & Horita, Geochim. Cosmochim. Acta 158 (2015) 276 (from memory)' }

export function vpdbToVsmow18O(d: Measured): Measured {
  return { value: VPDB_TO_VSMOW_18O.factor * d.value + VPDB_TO_VSMOW_18O.offset, u: VPDB_TO_VSMOW_18O.factor * d.u }
}
export function vsmowToVpdb18O(d: Measured): Measured {
  return { value: (d.value - VPDB_TO_VSMOW_18O.offset) / VPDB_TO_VSMOW_18O.factor, u: d.u / VPDB_TO_VSMOW_18O.factor }
}

export interface ReferenceMaterial extends MaterialValues {
  /** What the material is (water, carbonate, nitrate, ...). */
  substance: string
  /** Notes a user must see: reassignments, exhausted stock, "defines the scale". */
  note?: string
  fromMemory: boolean
}

const m = (v: number, u: number): Measured => ({ value: v, u })

/** The registry, keyed by id. δ in ‰; δ18O on VSMOW under "δ18O", on VPDB under "δ18O_VPDB". */
export const referenceMaterials: Record<string, ReferenceMaterial> = {
  'VSMOW2': { id: 'VSMOW2', name: 'VSMOW2', substance: 'water', values: { 'δ2H': m(0, 0.3), 'δ18O': m(0, 0.02) }, source: 'IAEA Reference Sheet VSMOW2 and SLAP2 (2017); from memory', note: 'Anchors the VSMOW–SLAP scale at 0 ‰.', fromMemory: true },
  'SLAP2': { id: 'SLAP2', name: 'SLAP2', substance: 'water', values: { 'δ2H': m(-427.5, 0.3), 'δ18O': m(-55.5, 0.02) }, source: 'IAEA Reference Sheet VSMOW2 and SLAP2 (2017); from memory', note: 'Realises the second anchor of the VSMOW–SLAP scale. The scale fixes the original SLAP at −428 ‰ δ2H and −55.5 ‰ δ18O by definition; SLAP2\'s −427.5 ± 0.3 ‰ and −55.50 ± 0.02 ‰ are measured values on that scale.', fromMemory: true },
  'GISP': { id: 'GISP', name: 'GISP', substance: 'water', values: { 'δ2H': m(-189.5, 1.2), 'δ18O': m(-24.78, 0.09) }, source: 'Gonfiantini, IAEA Advisory Group report (1984); IAEA reference sheet; from memory', note: 'Stock exhausted; GISP2 replaces it (its values are not entered here: not recalled with confidence).', fromMemory: true },
  'NBS19': { id: 'NBS19', name: 'NBS 19', substance: 'calcite', values: { 'δ13C': m(1.95, 0), 'δ18O_VPDB': m(-2.2, 0) }, source: 'Coplen, Pure Appl. Chem. 66 (1994) 273; Brand et al., Pure Appl. Chem. 86 (2014) 425; from memory', note: 'Defines VPDB (exact by definition); stock exhausted, IAEA-603 replaces it.', fromMemory: true },
  'IAEA-603': { id: 'IAEA-603', name: 'IAEA-603', substance: 'calcite', values: { 'δ13C': m(2.46, 0.01), 'δ18O_VPDB': m(-2.37, 0.04) }, source: 'IAEA Reference Sheet IAEA-603 (2016); from memory', note: 'Realises VPDB in place of NBS 19.', fromMemory: true },
  'LSVEC': { id: 'LSVEC', name: 'LSVEC', substance: 'lithium carbonate', values: { 'δ13C': m(-46.479, 0.15), 'δ18O_VPDB': m(-26.7, 0.2) }, source: 'δ13C: the IAEA reassignment, Assonov et al., Rapid Commun. Mass Spectrom. 35 (2021) (article number not recalled with confidence), replacing the −46.6 ‰ consensus of Coplen et al., Anal. Chem. 78 (2006) 2439; from memory', note: 'δ13C reassigned after 2018 (drift of the material); IUPAC no longer recommends it as a scale anchor.', fromMemory: true },
  'USGS40': { id: 'USGS40', name: 'USGS40', substance: 'L-glutamic acid', values: { 'δ13C': m(-26.389, 0.042), 'δ15N': m(-4.52, 0.06) }, source: 'δ15N: Qi et al., Rapid Commun. Mass Spectrom. 17 (2003) 2483; δ13C: Coplen et al., Anal. Chem. 78 (2006) 2439; from memory', note: 'δ13C on the pre-2018 VPDB realisation (NBS 19 and LSVEC at −46.6 ‰); not re-expressed on the IAEA-603/LSVEC-2021 realisation.', fromMemory: true },
  'USGS41a': { id: 'USGS41a', name: 'USGS41a', substance: 'L-glutamic acid', values: { 'δ13C': m(36.55, 0.08), 'δ15N': m(47.55, 0.15) }, source: 'Qi et al., Rapid Commun. Mass Spectrom. 30 (2016) 859; from memory', fromMemory: true },
  'IAEA-N-1': { id: 'IAEA-N-1', name: 'IAEA-N-1', substance: 'ammonium sulfate', values: { 'δ15N': m(0.43, 0.07) }, source: 'Böhlke & Coplen, IAEA-TECDOC-825 (1995) 51; from memory', fromMemory: true },
  'IAEA-N-2': { id: 'IAEA-N-2', name: 'IAEA-N-2', substance: 'ammonium sulfate', values: { 'δ15N': m(20.41, 0.12) }, source: 'Böhlke & Coplen, IAEA-TECDOC-825 (1995) 51; from memory', fromMemory: true },
  'USGS25': { id: 'USGS25', name: 'USGS25', substance: 'ammonium sulfate', values: { 'δ15N': m(-30.41, 0.27) }, source: 'Böhlke & Coplen, IAEA-TECDOC-825 (1995) 51; from memory', fromMemory: true },
  'USGS32': { id: 'USGS32', name: 'USGS32', substance: 'potassium nitrate', values: { 'δ15N': m(180, 1), 'δ18O': m(25.7, 0.4) }, source: 'Böhlke et al., Rapid Commun. Mass Spectrom. 17 (2003) 1835; from memory', fromMemory: true },
  'AIR-N2': { id: 'AIR-N2', name: 'Atmospheric N2', substance: 'air nitrogen', values: { 'δ15N': m(0, 0) }, source: 'Mariotti, Nature 303 (1983) 685 (air N2 defines δ15N = 0); from memory', note: 'Defines the AIR scale: δ15N = 0 ‰ exactly.', fromMemory: true },
  'VPDB': { id: 'VPDB', name: 'VPDB', substance: 'virtual (scale zero)', values: { 'δ13C': m(0, 0), 'δ18O_VPDB': m(0, 0) }, source: 'Coplen, Pure Appl. Chem. 66 (1994) 273; from memory', note: 'A scale, not a material: 0 ‰ by definition.', fromMemory: true },
}

export function referenceMaterial(id: string): ReferenceMaterial | undefined {
  return Object.hasOwn(referenceMaterials, id) ? referenceMaterials[id] : undefined
}

/**
 * A material's accepted value of a quantity on a scale. δ18O is converted between VPDB and
 * VSMOW (Brand et al. 2014) when the material states only the other; undefined when it states
 * neither (the material does not anchor that quantity).
 */
export function acceptedValue(material: MaterialValues, quantity: string, scale: string): Measured | undefined {
  const has = (k: string) => Object.hasOwn(material.values, k) ? material.values[k] : undefined
  if (quantity === 'δ18O' && scale === 'VPDB') {
    const direct = has('δ18O_VPDB')
    if (direct) return direct
    const vsmow = has('δ18O')
    return vsmow && vsmowToVpdb18O(vsmow)
  }
  if (quantity === 'δ18O' && scale === 'VSMOW') {
    const direct = has('δ18O')
    if (direct) return direct
    const vpdb = has('δ18O_VPDB')
    return vpdb && vpdbToVsmow18O(vpdb)
  }
  const expected = quantityScales[quantity]
  if (expected && expected !== scale) throw new EngineError('quantity', 'unknown-scale', `${quantity} is not reported on ${scale}`)
  return has(quantity)
}
