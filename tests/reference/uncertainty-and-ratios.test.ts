import { describe, expect, it } from 'vitest'
import {
  deltaPermil, geometry, isotope, propagate, propagateMonteCarlo, ratioAndDelta, referenceRatios, sweepToMz,
} from '../../shared/engine'

describe('GUM first-order propagation (JCGM 100:2008)', () => {
  it('for y = c·x1^p1·x2^p2…, (u_c/y)² = Σ (p_i u_i/x_i)² (GUM 5.1.6, note 2)', () => {
    const inputs = [{ value: 0.27, u: 0.0002 }, { value: 0.61, u: 0.0003 }, { value: 3000, u: 0.6 }]
    const model = ([r, B, U]: number[]) => (r! * B!) ** 2 / (2 * U!)
    const y = propagate(model, inputs)
    const rel = Math.sqrt((2 * 0.0002 / 0.27) ** 2 + (2 * 0.0003 / 0.61) ** 2 + (0.6 / 3000) ** 2)
    expect(y.u / y.value).toBeCloseTo(rel, 9)
    expect(y.contributions).toHaveLength(3)
  })

  it('the geometry\'s analytic m/z uncertainty equals the numeric one, and a Monte Carlo run (GUM-S1, JCGM 101:2008) agrees within 1 %', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm', u: 0.0002 } })
    const col = sweepToMz(geo, { settings: { acceleratingVoltage: { value: 3000, unit: 'V', u: 0.6 } }, sweep: { reading: 'field', values: [0.6, 0.62], unit: 'T', u: 0.0003 }, detectors: [] })
    const mz = col.mz[0]!
    const K = 1.602176634e-19 / 1.6605390666e-27
    const inputs = [{ value: 0.27, u: 0.0002 }, { value: 0.6, u: 0.0003 }, { value: 3000, u: 0.6 }]
    const model = ([r, B, U]: number[]) => (r! * B!) ** 2 / (2 * U!) * K
    const first = propagate(model, inputs)
    expect(col.relU(mz)).toBeCloseTo(first.u / first.value, 9)
    const mc = propagateMonteCarlo(model, inputs, 200_000, 7)
    expect(Math.abs(mc.u / first.u - 1)).toBeLessThan(0.01)
    expect(Math.abs(mc.mean / first.value - 1)).toBeLessThan(1e-5)
  })

  it('for a ratio of two areas the relative uncertainties add in quadrature, and Monte Carlo agrees', () => {
    const heavy = { area: 0.0112, areaU: 0.000004 }
    const light = { area: 1, areaU: 0.0002 }
    const r = ratioAndDelta('VPDB:13C/12C', heavy, light)
    expect(r.ratioU / r.ratio).toBeCloseTo(Math.hypot(0.000004 / 0.0112, 0.0002), 9)
    const mc = propagateMonteCarlo(([h, l]) => h! / l!, [{ value: heavy.area, u: heavy.areaU }, { value: light.area, u: light.areaU }], 200_000, 11)
    expect(Math.abs(mc.u / r.ratioU - 1)).toBeLessThan(0.01)
  })
})

describe('reference ratios and δ-values', () => {
  it.each([
    // Werner & Brand, RCM 15 (2001) 501 (from memory)
    ['VPDB:13C/12C', 0.0111802],
    ['VPDB:18O/16O', 0.0020672],
    // Hagemann et al. 1970; Baertschi 1976 (from memory)
    ['VSMOW:2H/1H', 155.76e-6],
    ['VSMOW:18O/16O', 2005.20e-6],
    // Junk & Svec 1958; Lee et al. 2006 (from memory)
    ['AIR:15N/14N', 0.0036765],
    ['AIR:40Ar/36Ar', 298.56],
  ] as const)('%s = %f', (id, ratio) => {
    expect(referenceRatios[id].ratio).toBe(ratio)
  })

  it('atmospheric 40Ar/36Ar from the IUPAC abundances in the isotope table is within 0.1 % of Lee et al. 2006', () => {
    const fromTable = isotope('40Ar').abundance! / isotope('36Ar').abundance!
    expect(Math.abs(fromTable / 298.56 - 1)).toBeLessThan(0.001)
  })

  it('δ = (R/R_std − 1) · 1000 ‰ (IUPAC definition, Coplen, RCM 25 (2011) 2538, from memory)', () => {
    expect(deltaPermil(0.0111802 * 0.975, 0.0111802)).toBeCloseTo(-25, 10)
    const r = ratioAndDelta('VPDB:13C/12C', { area: 0.0111802 * 1.0043, areaU: 0 }, { area: 1, areaU: 0 })
    expect(r.deltaPermil).toBeCloseTo(4.3, 9)
    expect(r.deltaName).toBe('δ13C')
  })
})
