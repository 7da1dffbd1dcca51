// The engine's constants and isotope table against published values. Each case names its
// source; values typed from memory say so.
import { ELECTRON_MASS as CE_ELECTRON_MASS } from 'chemical-elements'
import { describe, expect, it } from 'vitest'
import {
  ATOMIC_MASS_CONSTANT_KG, CODATA_2018, CODATA_EDITION, ELECTRON_MASS_U, ELEMENTARY_CHARGE_C, KG_PER_C_TO_U_PER_E, SPEED_OF_LIGHT_M_PER_S,
  formulaSpecies, ionMz, isotope, naturalIsotopes, neutralMassFromMz,
} from '../../shared/engine'

// CODATA 2022: Mohr, Newell, Taylor, Tiesinga, Rev. Mod. Phys. 97 (2025) 025002 (values
// checked against the 2022 table as carried by the mp-units codata2022.h header).
// CODATA 2018: Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010 (engine 1.x compatibility).
describe('CODATA constants', () => {
  it('names its edition', () => expect(CODATA_EDITION).toBe('CODATA 2022'))

  it('c = 299 792 458 m/s (exact, SI Brochure, 9th ed.)', () => expect(SPEED_OF_LIGHT_M_PER_S).toBe(299792458))

  it('e is exact in the 2019 SI: 1.602 176 634 × 10⁻¹⁹ C (SI Brochure, 9th ed.)', () => {
    expect(ELEMENTARY_CHARGE_C).toBe(1.602176634e-19)
  })

  it('m_u = 1.660 539 068 92(52) × 10⁻²⁷ kg (CODATA 2022); 1.660 539 066 60(50) × 10⁻²⁷ kg (CODATA 2018)', () => {
    expect(ATOMIC_MASS_CONSTANT_KG).toBe(1.66053906892e-27)
    expect(CODATA_2018.atomicMassConstantKg).toBe(1.6605390666e-27)
  })

  it('e/m_u equals N_A·e / (N_A·m_u): F = 96 485.332 12 C/mol (exact N_A, e) over M_u = 1.000 000 001 05(31) × 10⁻³ kg/mol (CODATA 2022, from memory)', () => {
    const faraday = 6.02214076e23 * 1.602176634e-19
    const molarMassConstant = 1.00000000105e-3
    expect(KG_PER_C_TO_U_PER_E / (faraday / molarMassConstant) - 1).toBeCloseTo(0, 9)
  })

  it('m_e = 5.485 799 090 441(97) × 10⁻⁴ u (CODATA 2022), and chemical-elements agrees to 10⁻¹⁰ u', () => {
    expect(ELECTRON_MASS_U).toBe(5.485799090441e-4)
    expect(CODATA_2018.electronMassU).toBe(5.48579909065e-4)
    expect(Math.abs(ELECTRON_MASS_U - CE_ELECTRON_MASS)).toBeLessThan(1e-10)
  })
})

// Atomic masses from memory of AME2020 (W.J. Huang et al., M. Wang et al., Chinese Phys. C 45
// (2021) 030002/030003); the isotope table comes from chemical-elements.
describe('atomic masses (AME2020, from memory)', () => {
  it.each([
    ['12C', 12, 0],
    ['13C', 13.00335483534, 2e-9],
    ['14N', 14.00307400425, 2e-9],
    ['15N', 15.00010889827, 2e-8],
    ['16O', 15.99491461926, 2e-9],
    ['18O', 17.99915961214, 2e-8],
    ['36Ar', 35.967545105, 1e-8],
    ['40Ar', 39.9623831237, 1e-8],
    ['84Kr', 83.9114977282, 1e-8],
    ['235U', 235.0439281, 3e-6],
    ['238U', 238.0507870, 3e-6],
  ])('%s = %f u', (label, mass, tolerance) => {
    expect(Math.abs(isotope(label).mass - mass)).toBeLessThanOrEqual(tolerance)
  })
})

// Representative isotopic compositions, IUPAC/CIAAW (Meija et al., Pure Appl. Chem. 88 (2016)
// 293), from memory.
describe('isotopic compositions (IUPAC, from memory)', () => {
  it.each([
    ['12C', 0.9893], ['13C', 0.0107], ['14N', 0.99636], ['15N', 0.00364], ['16O', 0.99757], ['18O', 0.00205],
    ['36Ar', 0.003336], ['40Ar', 0.996035], ['84Kr', 0.56987], ['235U', 0.007204], ['238U', 0.992742],
  ])('%s abundance %f', (label, abundance) => {
    expect(isotope(label).abundance).toBeCloseTo(abundance, 5)
  })

  it('every element with natural isotopes sums to 1 within rounding', () => {
    const byElement = new Map<string, number>()
    for (const s of naturalIsotopes()) {
      const element = s.label.replace(/^\d+/, '')
      byElement.set(element, (byElement.get(element) ?? 0) + s.abundance!)
    }
    for (const [element, total] of byElement) expect(total, element).toBeCloseTo(1, 3)
  })
})

describe('ions and neutral masses', () => {
  it('an ion of charge z weighs z electron masses less than the atom (common practice, no source)', () => {
    const ar = isotope('40Ar').mass
    expect(ionMz(ar, 1)).toBeCloseTo(ar - ELECTRON_MASS_U, 12)
    expect(ionMz(ar, 2)).toBeCloseTo((ar - 2 * ELECTRON_MASS_U) / 2, 12)
    for (const z of [1, 2, 3]) expect(neutralMassFromMz(ionMz(ar, z), z)).toBeCloseTo(ar, 10)
  })

  it('CO2 is 12 + 2 × m(16O) = 43.989 829 24 u (AME2020 masses, from memory)', () => {
    expect(formulaSpecies('CO2').mass).toBeCloseTo(12 + 2 * 15.99491461926, 8)
  })
})

// isotopic-distribution (cheminfo, npm) as a second opinion on isotope patterns.
describe('isotope patterns against isotopic-distribution', () => {
  it('krypton: the engine\'s abundances relative to 84Kr match the computed pattern', async () => {
    const { IsotopicDistribution } = await import('isotopic-distribution')
    const table = new IsotopicDistribution('Kr', { fwhm: 0.001 }).getTable({ maxValue: 1 }) as { x: number, y: number }[]
    const kr = naturalIsotopes().filter(s => /^\d+Kr$/.test(s.label))
    const a84 = isotope('84Kr').abundance!
    for (const s of kr) {
      const line = table.find(t => Math.abs(t.x - s.mass) < 1e-4)
      expect(line, s.label).toBeDefined()
      expect(line!.y).toBeCloseTo(s.abundance! / a84, 6)
    }
  })

  it('CO2: M+1/M = 13C/12C + 2·17O/16O from the table equals the computed pattern (common practice, no source)', async () => {
    const { IsotopicDistribution } = await import('isotopic-distribution')
    const table = new IsotopicDistribution('CO2', { fwhm: 0.5 }).getTable({ maxValue: 1 }) as { x: number, y: number }[]
    const m1 = isotope('13C').abundance! / isotope('12C').abundance! + 2 * isotope('17O').abundance! / isotope('16O').abundance!
    expect(table[1]!.y).toBeCloseTo(m1, 5)
  })
})
