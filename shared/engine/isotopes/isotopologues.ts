import { EngineError } from '../errors'
import { propagate } from '../uncertainty'
import { scaleRatios } from './referenceMaterials'
import type { Measured } from './types'

// Molecular ion ratios from atomic isotope ratios and back, exactly (random distribution of
// isotopes over the molecule's atoms, common practice, no source beyond the combinatorics):
//  CO2: 45R = 13R + 2·17R,  46R = 2·18R + 2·13R·17R + 17R²
//  N2:  29R = 2·15R,        30R = 15R²
//  O2:  33R = 2·17R,        34R = 2·18R + 17R²
//  H2:  3R  = 2·2R (HD/H2), plus H3+ formed in the source: 3R_meas = 3R + K·i2
// The CO2 and O2 17O parameters: Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719,
// the IUPAC-recommended set, values from memory: K = 0.01022461, λ = 0.528, 13R_VPDB = 0.011180
// and 18R_VPDB-CO2 = 0.002088349 (the CO2 made from VPDB with phosphoric acid at 25 °C, not VPDB
// carbonate's 0.0020672). K is the paper's stated value, not recomputed from rounded ratios;
// 17R_VPDB-CO2 = K·(18R_VPDB-CO2)^λ follows from it (≈ 0.0003931). The δ18O this engine computes
// for CO2 is therefore on VPDB-CO2, which by the identical-treatment convention carries the
// same numbers as the carbonate's δ18O on VPDB (Brand et al. 2010).

export const BRAND_2010 = {
  lambda: scaleRatios['VPDB-CO2'].lambda,
  K: scaleRatios['VPDB-CO2'].K,
  r13: scaleRatios['VPDB-CO2']['13R'],
  r18: scaleRatios['VPDB-CO2']['18R'],
  get r17() { return this.K * this.r18 ** this.lambda },
  source: 'Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719 (IUPAC technical report): K = 0.01022461, λ = 0.528, 13R_VPDB = 0.011180, 18R_VPDB-CO2 = 0.002088349; values from memory',
} as const

/** Mass-dependent 17R from 18R: 17R = K·(18R)^λ (Brand et al. 2010, eq. for the 17O assumption). */
export function r17FromR18(r18: number, K = BRAND_2010.K, lambda = BRAND_2010.lambda): number {
  return K * r18 ** lambda
}

export function co2MolecularRatios(r13: number, r18: number, r17 = r17FromR18(r18)): { r45: number, r46: number } {
  return { r45: r13 + 2 * r17, r46: 2 * r18 + 2 * r13 * r17 + r17 * r17 }
}

/**
 * 13R and 18R from the CO2 45R and 46R, solved exactly by Newton's method on 18R: with
 * 13R = 45R − 2·17R, 46R = 2·18R + 2·45R·17R − 3·17R² and 17R = K·18R^λ (Brand et al. 2010,
 * their eqs. for the "IUPAC" algorithm; Santrock, Studley & Hayes, Anal. Chem. 57 (1985) 1444
 * solve the same system).
 */
export function co2AtomicRatios(r45: number, r46: number, K = BRAND_2010.K, lambda = BRAND_2010.lambda): { r13: number, r18: number, r17: number } {
  if (!(r45 > 0) || !(r46 > 0)) throw new EngineError('ratios', 'not-positive', 'the 45/44 and 46/44 ratios must be positive')
  let x = r46 / 2
  for (let i = 0; i < 50; i++) {
    const r17 = K * x ** lambda
    const f = 2 * x + 2 * r45 * r17 - 3 * r17 * r17 - r46
    const df = 2 + 2 * r45 * lambda * r17 / x - 6 * lambda * r17 * r17 / x
    const step = f / df
    x -= step
    if (Math.abs(step) < 1e-16 * x) break
  }
  const r17 = K * x ** lambda
  return { r13: r45 - 2 * r17, r18: x, r17 }
}

/** ((1 + a/1000)(1 + b/1000) − 1)·1000: a δ against the reference gas carried onto the gas's scale. */
export function composeDelta(aPermil: number, bPermil: number): number {
  return ((1 + aPermil / 1000) * (1 + bPermil / 1000) - 1) * 1000
}

/**
 * CO2: δ13C and δ18O (on VPDB) of a gas from its δ45 and δ46 against a reference gas whose
 * δ13C and δ18O on VPDB are known. The reference gas's molecular ratios come from its atomic
 * ratios; the sample's are those times (1 + δ/1000); the atomic ratios are solved exactly.
 */
export function co2DeltasFromMolecular(d45: number, d46: number, ref: { d13C: number, d18O: number }): { d13C: number, d18O: number } {
  const refR = co2MolecularRatios(BRAND_2010.r13 * (1 + ref.d13C / 1000), BRAND_2010.r18 * (1 + ref.d18O / 1000))
  const atoms = co2AtomicRatios(refR.r45 * (1 + d45 / 1000), refR.r46 * (1 + d46 / 1000))
  return { d13C: (atoms.r13 / BRAND_2010.r13 - 1) * 1000, d18O: (atoms.r18 / BRAND_2010.r18 - 1) * 1000 }
}

/** The same with u (GUM 5.1 first-order, sensitivities by central differences). */
export function co2DeltasWithU(d45: Measured, d46: Measured, ref: { d13C: Measured, d18O: Measured }, includeReferenceU: boolean): { d13C: Measured, d18O: Measured } {
  const inputs = [d45, d46, includeReferenceU ? ref.d13C : { ...ref.d13C, u: 0 }, includeReferenceU ? ref.d18O : { ...ref.d18O, u: 0 }]
  const model = (k: 'd13C' | 'd18O') => (x: number[]) => co2DeltasFromMolecular(x[0]!, x[1]!, { d13C: x[2]!, d18O: x[3]! })[k]
  const c = propagate(model('d13C'), inputs)
  const o = propagate(model('d18O'), inputs)
  return { d13C: { value: c.value, u: c.u }, d18O: { value: o.value, u: o.u } }
}

/** VSMOW's K for O2 when 33 is not measured: 17R = K·18R^λ with VSMOW's ratios (from memory, see scaleRatios). */
const VSMOW_K = scaleRatios.VSMOW['17R'] / scaleRatios.VSMOW['18R'] ** BRAND_2010.lambda

/**
 * O2: δ18O and δ17O (VSMOW) from δ34 and δ33 against the reference gas (33R = 2·17R,
 * 34R = 2·18R + 17R², solved directly). Without δ33, 17R follows 18R mass-dependently
 * (λ = 0.528, Brand et al. 2010) and 34R is solved by Newton's method.
 */
export function o2DeltasFromMolecular(d34: number, d33: number | undefined, ref: { d18O: number, d17O?: number }): { d18O: number, d17O: number } {
  const V = scaleRatios.VSMOW
  const refR18 = V['18R'] * (1 + ref.d18O / 1000)
  const refR17 = ref.d17O !== undefined ? V['17R'] * (1 + ref.d17O / 1000) : VSMOW_K * refR18 ** BRAND_2010.lambda
  const r34 = (2 * refR18 + refR17 * refR17) * (1 + d34 / 1000)
  let r17: number
  let r18: number
  if (d33 !== undefined) {
    r17 = refR17 * (1 + d33 / 1000)
    r18 = (r34 - r17 * r17) / 2
  }
  else {
    r18 = r34 / 2
    for (let i = 0; i < 30; i++) {
      const q = VSMOW_K * r18 ** BRAND_2010.lambda
      const step = (2 * r18 + q * q - r34) / (2 + 2 * BRAND_2010.lambda * q * q / r18)
      r18 -= step
      if (Math.abs(step) < 1e-16 * r18) break
    }
    r17 = VSMOW_K * r18 ** BRAND_2010.lambda
  }
  return { d18O: (r18 / V['18R'] - 1) * 1000, d17O: (r17 / V['17R'] - 1) * 1000 }
}

export function o2MolecularRatios(r18: number, r17: number): { r33: number, r34: number } {
  return { r33: 2 * r17, r34: 2 * r18 + r17 * r17 }
}

export { VSMOW_K }
