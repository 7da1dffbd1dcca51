import { describe, expect, it } from 'vitest'
import {
  BRAND_2010, VPDB_TO_VSMOW_18O, acceptedValue, coverageFactor, reducedChi2Limit99, co2AtomicRatios, co2DeltasFromMolecular, co2MolecularRatios, composeDelta, isotopologueAbundances,
  o2DeltasFromMolecular, o2MolecularRatios, referenceMaterials, scaleRatios, weightedLine, yorkFit,
} from '../../shared/engine'

// The isotope engine's formulas against published values. Every value below was typed from
// memory of the source named beside it (no network access when it was written).

describe('reference materials (values from memory of the named reference sheets and papers)', () => {
  it.each([
    ['VSMOW2', 'δ2H', 0, 0.3, /VSMOW2 and SLAP2/],
    ['SLAP2', 'δ2H', -427.5, 0.3, /VSMOW2 and SLAP2/],
    ['SLAP2', 'δ18O', -55.5, 0.02, /VSMOW2 and SLAP2/],
    ['NBS19', 'δ13C', 1.95, 0, /Coplen/],
    ['IAEA-603', 'δ13C', 2.46, 0.01, /IAEA-603/],
    ['IAEA-603', 'δ18O_VPDB', -2.37, 0.04, /IAEA-603/],
    ['LSVEC', 'δ13C', -46.479, 0.15, /Assonov/],
    ['USGS40', 'δ15N', -4.52, 0.06, /Qi et al/],
    ['USGS41a', 'δ15N', 47.55, 0.15, /Qi et al/],
    ['IAEA-N-1', 'δ15N', 0.43, 0.07, /Böhlke & Coplen/],
    ['IAEA-N-2', 'δ15N', 20.41, 0.12, /Böhlke & Coplen/],
    ['USGS25', 'δ15N', -30.41, 0.27, /Böhlke & Coplen/],
    ['USGS32', 'δ15N', 180, 1, /Böhlke et al/],
    ['AIR-N2', 'δ15N', 0, 0, /Mariotti/],
  ])('%s %s = %f ± %f', (id, q, value, u, source) => {
    const m = referenceMaterials[id]!
    expect(m.values[q]).toEqual({ value, u })
    expect(m.source).toMatch(source)
    expect(m.fromMemory).toBe(true)
  })

  it('citations: the VPDB→VSMOW conversion names Brand et al. 2014, SLAP2 says its values are measured, USGS40 δ13C names Coplen et al. 2006 on the pre-2018 scale', () => {
    expect(VPDB_TO_VSMOW_18O.source).toMatch(/Brand et al\., Pure Appl\. Chem\. 86 \(2014\) 425/)
    expect(referenceMaterials.SLAP2!.note).toMatch(/−428 ‰.*by definition.*measured/)
    expect(referenceMaterials.USGS40!.source).toMatch(/δ13C: Coplen et al\., Anal\. Chem\. 78 \(2006\) 2439/)
    expect(referenceMaterials.USGS40!.note).toMatch(/pre-2018/)
    expect(referenceMaterials.LSVEC!.source).toMatch(/−46\.6 ‰ consensus of Coplen et al/)
  })

  it('LSVEC carries its post-2018 δ13C reassignment and says so', () => {
    expect(referenceMaterials.LSVEC!.note).toMatch(/reassigned/)
    expect(referenceMaterials.LSVEC!.values['δ13C']!.value).not.toBe(-46.6)
  })

  it('δ18O converts between VPDB and VSMOW: δ_VSMOW = 1.03092 δ_VPDB + 30.92 (Brand et al., Pure Appl. Chem. 86 (2014) 425; Kim, Coplen & Horita, GCA 158 (2015) 276; not Coplen et al. 1983\'s 1.03091/30.91)', () => {
    expect(acceptedValue(referenceMaterials['IAEA-603']!, 'δ18O', 'VSMOW')!.value).toBeCloseTo(1.03092 * -2.37 + 30.92, 10)
    expect(acceptedValue(referenceMaterials.SLAP2!, 'δ18O', 'VPDB')!.value).toBeCloseTo((-55.5 - 30.92) / 1.03092, 10)
  })
})

describe('CO2 17O correction, Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719 (parameters from memory)', () => {
  it('uses the IUPAC set: K = 0.01022461, λ = 0.528, 13R_VPDB = 0.011180, 18R_VPDB-CO2 = 0.002088349', () => {
    expect([BRAND_2010.K, BRAND_2010.lambda, BRAND_2010.r13, BRAND_2010.r18]).toEqual([0.01022461, 0.528, 0.011180, 0.002088349])
  })

  it('K derived from the set: 17R_VPDB-CO2 = 0.0003931 (Brand et al. 2010, table of the IUPAC ratios) gives K = 17R/18R^λ = 0.01022461 to its 4 significant figures', () => {
    // The paper lists 17R_VPDB-CO2 = 0.0003931 (4 figures), so K derived from it agrees to ≈ 1e-4 relative.
    expect(Math.abs(0.0003931 / 0.002088349 ** 0.528 / 0.01022461 - 1)).toBeLessThan(1.3e-4)
    expect(BRAND_2010.r17).toBeCloseTo(0.0003931, 7)
    // VPDB carbonate's 18R (0.0020672) with the same 17R would give K ≈ 0.01028, 0.54 % off: the mix-up the set avoids.
    expect(Math.abs(0.0003931 / 0.0020672 ** 0.528 / 0.01022461 - 1)).toBeGreaterThan(5e-3)
  })

  it('a gas of exactly VPDB composition: 45R = 13R + 2·17R and 46R = 2·18R + 2·13R·17R + 17R² (issue 19: naive δ45 ≈ +70 ‰, δ46 ≈ +1000 ‰)', () => {
    const r = co2MolecularRatios(BRAND_2010.r13, BRAND_2010.r18)
    const r17 = 0.01022461 * 0.002088349 ** 0.528
    expect(r.r45).toBeCloseTo(0.011180 + 2 * r17, 15)
    expect(r.r46).toBeCloseTo(2 * 0.002088349 + 2 * 0.011180 * r17 + r17 ** 2, 15)
    expect((r.r45 / BRAND_2010.r13 - 1) * 1000).toBeCloseTo(70.3, 1)
    expect((r.r46 / BRAND_2010.r18 - 1) * 1000).toBeCloseTo(1004.3, 1)
    const atoms = co2AtomicRatios(r.r45, r.r46)
    expect(atoms.r13).toBeCloseTo(BRAND_2010.r13, 15)
    expect(atoms.r18).toBeCloseTo(BRAND_2010.r18, 15)
  })

  it.each([[-46.5, -26.7], [2.46, -2.37], [-25.3, -8.1], [36.5, 40.0]])('inverts exactly at δ13C %f, δ18O %f', (d13, d18) => {
    const r = co2MolecularRatios(BRAND_2010.r13 * (1 + d13 / 1000), BRAND_2010.r18 * (1 + d18 / 1000))
    const a = co2AtomicRatios(r.r45, r.r46)
    expect((a.r13 / BRAND_2010.r13 - 1) * 1000).toBeCloseTo(d13, 10)
    expect((a.r18 / BRAND_2010.r18 - 1) * 1000).toBeCloseTo(d18, 10)
  })

  it('linearised near VPDB it reproduces Craig (GCA 12 (1957) 133): δ13C ≈ 1.0676 δ45 − 0.0338 δ18O, δ18O ≈ 1.0010 δ46 − 0.0021 δ13C (from memory; Craig\'s ratios and λ = 0.5 differ, so within 0.004)', () => {
    const h = 1e-3
    const ref = { d13C: 0, d18O: 0 }
    const by45 = co2DeltasFromMolecular(h, 0, ref)
    const by46 = co2DeltasFromMolecular(0, h, ref)
    expect(by45.d13C / h).toBeCloseTo(1.0676, 2)
    expect(Math.abs(by45.d13C / h - 1.0676)).toBeLessThan(0.004)
    // ∂δ13C/∂δ46 = −0.0338·∂δ18O/∂δ46 to first order
    expect(Math.abs(by46.d13C / h + 0.0338 * 1.001)).toBeLessThan(0.004)
    expect(by46.d18O / h).toBeCloseTo(1.0010, 3)
    expect(Math.abs(by45.d18O / h + 0.0021 * 1.0676)).toBeLessThan(0.0005)
  })
})

describe('N2, O2 and H2 molecular ratios (combinatorics of the random distribution; common practice, no source)', () => {
  it('N2: 29R = 2·15R, so δ29 = δ15N exactly, while 29/28 read as 15N/14N is ≈ +1000 ‰ (issue 19)', () => {
    const a = isotopologueAbundances('N2', { 'δ15N': 12.5 })
    const r29 = a[29]! / a[28]!
    expect(r29 / 2 / scaleRatios.AIR['15R']).toBeCloseTo(1.0125, 12)
    expect((r29 / scaleRatios.AIR['15R'] - 1) * 1000).toBeCloseTo(1025, 0)
    expect(a[30]! / a[28]!).toBeCloseTo((r29 / 2) ** 2, 15)
  })

  it('O2: 33R = 2·17R and 34R = 2·18R + 17R², inverted exactly with and without the 33 beam', () => {
    const ref = { d18O: 23.5, d17O: 12.1 }
    const refR = o2MolecularRatios(scaleRatios.VSMOW['18R'] * 1.0235, scaleRatios.VSMOW['17R'] * 1.0121)
    const s = o2MolecularRatios(scaleRatios.VSMOW['18R'] * 0.99, scaleRatios.VSMOW['17R'] * 0.9947)
    const out = o2DeltasFromMolecular((s.r34 / refR.r34 - 1) * 1000, (s.r33 / refR.r33 - 1) * 1000, ref)
    expect(out.d18O).toBeCloseTo(-10, 10)
    expect(out.d17O).toBeCloseTo(-5.3, 10)
  })

  it('H2: HD/H2 = 2·D/H and the δ composes onto VSMOW: (1 + δ_a)(1 + δ_b) − 1', () => {
    const a = isotopologueAbundances('H2', { 'δ2H': -427.5 })
    expect(a[3]! / a[2]! / 2 / scaleRatios.VSMOW['2R']).toBeCloseTo(0.5725, 12)
    expect(composeDelta(-100, -50)).toBeCloseTo(-145, 12)
  })
})

describe('coverage factor for few degrees of freedom', () => {
  it.each([[1, 13.97], [2, 4.53], [3, 3.31], [4, 2.87], [5, 2.65], [6, 2.52], [8, 2.37], [10, 2.28], [20, 2.13], [50, 2.05]])('t_95.45 with ν = %i is %f (GUM JCGM 100:2008 Table G.2; from memory)', (dof, k) => {
    expect(coverageFactor(dof)).toBeCloseTo(k, 2)
  })

  it('tends to 2 for a normal output (ν → ∞)', () => {
    expect(Math.abs(coverageFactor(1e9) - 2)).toBeLessThan(1e-3)
  })
})

describe('scatter of anchor replicates', () => {
  it.each([[2, 9.2103], [4, 13.2767], [10, 23.2093]])('χ²_0.99 with ν = %i is %f (Abramowitz & Stegun, Handbook of Mathematical Functions (1964) table 26.8; from memory): the Wilson–Hilferty limit within 1 %', (dof, chi2) => {
    expect(Math.abs(reducedChi2Limit99(dof) * dof / chi2 - 1)).toBeLessThan(0.01)
  })
})

describe('straight lines', () => {
  it('York et al. (Am. J. Phys. 72 (2004) 367) on Pearson\'s data with York\'s weights: a = 5.4799, b = −0.4805, σa = 0.2950, σb = 0.0580 (from memory; the same figures in Wehr & Saleska, Biogeosciences 14 (2017) 17)', () => {
    const X = [0.0, 0.9, 1.8, 2.6, 3.3, 4.4, 5.2, 6.1, 6.5, 7.4]
    const wX = [1000, 1000, 500, 800, 200, 80, 60, 20, 1.8, 1.0]
    const Y = [5.9, 5.4, 4.4, 4.6, 3.5, 3.7, 2.8, 2.8, 2.4, 1.5]
    const wY = [1, 1.8, 4, 8, 20, 20, 70, 70, 100, 500]
    const fit = yorkFit(X, wX.map(w => 1 / Math.sqrt(w)), Y, wY.map(w => 1 / Math.sqrt(w)))
    expect(fit.intercept).toBeCloseTo(5.4799, 4)
    expect(fit.slope).toBeCloseTo(-0.4805, 4)
    expect(fit.uIntercept).toBeCloseTo(0.2950, 3)
    expect(fit.uSlope).toBeCloseTo(0.0580, 3)
  })

  it('two points: the York line passes through both (two-point normalisation, Coplen 2011)', () => {
    const fit = yorkFit([-1.3, -44.8], [0.01, 0.02], [2.46, -46.479], [0.01, 0.15])
    expect(fit.intercept + fit.slope * -1.3).toBeCloseTo(2.46, 10)
    expect(fit.intercept + fit.slope * -44.8).toBeCloseTo(-46.479, 10)
  })

  it('weighted least squares (Bevington & Robinson 2003 §6.4): exact points, and u(b) = √(S/Δ)', () => {
    const fit = weightedLine([0, 1, 2, 3], [1, 3, 5, 7], [0.1, 0.1, 0.1, 0.1])
    expect(fit.slope).toBeCloseTo(2, 12)
    expect(fit.intercept).toBeCloseTo(1, 12)
    // S = 400, Sx = 600, Sxx = 1400, Δ = 400·1400 − 600² = 200000
    expect(fit.uSlope).toBeCloseTo(Math.sqrt(400 / 200000), 12)
    expect(fit.covariance).toBeCloseTo(-600 / 200000, 12)
  })
})
