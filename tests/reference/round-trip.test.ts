// Round trip through the forward model: simulate the readings an instrument would report
// for known species, run the engine, and recover each species' m/z, identity and charge.
import fc from 'fast-check'
import { describe, expect, it } from 'vitest'
import { formulaSpecies, geometry, ionMz, isotope, PHYSICS_1X, PHYSICS_2X, processReadings, simulateFieldSweep, type Species } from '../../shared/engine'

// Isotopes whose lines at z = 1..3 the tests draw from (masses: AME2020 via chemical-elements).
const pool = ['4He', '12C', '14N', '16O', '20Ne', '36Ar', '40Ar', '84Kr', '86Kr', '129Xe', '132Xe'].map(isotope)

const lineArb = fc.record({ species: fc.constantFrom(...pool), z: fc.integer({ min: 1, max: 3 }), currentA: fc.double({ min: 1e-13, max: 1e-9, noNaN: true }) })

/**
 * Lines far enough apart (50 FWHM) that the peaks do not touch, within a factor 3 of m/z
 * so one sweep covers them with enough points per peak.
 */
function separated(lines: { species: Species, z: number, currentA: number }[], R: number) {
  const sorted = [...lines].sort((a, b) => ionMz(a.species.mass, a.z) - ionMz(b.species.mass, b.z))
  const kept: typeof sorted = []
  for (const l of sorted) {
    const last = kept.at(-1)
    const mz = ionMz(l.species.mass, l.z)
    if (mz > 3 * ionMz(sorted[0]!.species.mass, sorted[0]!.z)) break
    if (!last || mz - ionMz(last.species.mass, last.z) > 50 * mz / R) kept.push(l)
  }
  return kept
}

describe('simulate → engine round trip (fast-check)', () => {
  it('recovers m/z within 20 ppm, and the species and charge, or flags the ambiguity', () => {
    fc.assert(fc.property(
      fc.array(lineArb, { minLength: 1, maxLength: 4 }),
      fc.double({ min: 0.08, max: 0.5, noNaN: true }), // analyzer radius, m
      fc.integer({ min: 1000, max: 10000 }), // accelerating potential, V
      fc.integer({ min: 2000, max: 10000 }), // resolving power
      fc.integer({ min: 1, max: 2 ** 31 - 1 }),
      (drawn, radius, voltage, R, seed) => {
        const lines = separated(drawn, R)
        const mzs = lines.map(l => ionMz(l.species.mass, l.z))
        const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: radius, unit: 'm' } })
        const from = Math.min(...mzs) * 0.97
        const to = Math.max(...mzs) * 1.03
        // The field steps evenly and m/z ∝ B², so points are sparsest at the low end: there
        // 2ΔB/B must stay under a twelfth of the FWHM (1/R).
        const points = Math.ceil(24 * R * (Math.sqrt(to / from) - 1)) + 200
        const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: voltage, mzFrom: from, mzTo: to, points, resolvingPower: R, species: lines, baselineA: 2e-15, noiseA: 1e-16, seed })
        const result = processReadings(geo, raw, { tolerance: { ppm: 20 } })
        for (const line of lines) {
          const mz = ionMz(line.species.mass, line.z)
          const peak = result.peaks.find(p => Math.abs(p.centroid - mz) / mz < 20e-6)
          expect(peak, `no peak near ${line.species.label}^${line.z}+ at ${mz}`).toBeDefined()
          if (peak!.ambiguous) {
            expect(peak!.candidates.some(c => c.species === line.species.label && c.z === line.z)).toBe(true)
          }
          else {
            expect(peak!.assignment).toMatchObject({ species: line.species.label, z: line.z })
            expect(Math.abs(peak!.assignment!.impliedNeutralMass - line.species.mass)).toBeLessThan(line.species.mass * 20e-6)
          }
          expect(peak!.resolvingPower! / R).toBeGreaterThan(0.9)
          expect(peak!.resolvingPower! / R).toBeLessThan(1.1)
        }
        for (const p of result.peaks) for (const v of [p.centroid, p.area, p.fwhm, p.snr, p.centroidU]) expect(Number.isFinite(v)).toBe(true)
      },
    ), { numRuns: 60, seed: 4242 })
  })

  // The Wien-filter simulator uses the engine's relation m/z = rB/(γv)·e/m_u (Jackson,
  // Classical Electrodynamics, 3rd ed., 1999, §12.1); a copy without γ put 4He+ at v = 4e6 m/s
  // 89 ppm low, (γ − 1) = v²/2c². Each physics is simulated and read with its own relation.
  it.each([['2.x', PHYSICS_2X], ['1.x', PHYSICS_1X]] as const)('a Wien-filter sweep puts 4He+ at its true m/z within 1 ppm (%s physics)', (compatibility, physics) => {
    const he = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 60, unit: 'mm', u: 0 }, plateGap: { value: 4, unit: 'mm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: he, plateVoltageV: 800, filterFieldT: 0.05, mzFrom: 3.5, mzTo: 4.5, points: 4000, resolvingPower: 120, species: [{ species: isotope('4He'), currentA: 2e-11 }], baselineA: 1e-15, noiseA: 1e-18, seed: 3, physics })
    const peak = processReadings(he, raw, { formulas: ['[4He]'], maxCharge: 1, compatibility }).peaks[0]!
    const truth = ionMz(isotope('4He').mass, 1)
    expect(Math.abs(peak.centroid - truth) / truth).toBeLessThan(1e-6)
  })

  it('links the z=1 and z=2 lines of one species', () => {
    const ar = isotope('40Ar')
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.2, unit: 'm' } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4000, mzFrom: 18, mzTo: 42, points: 200_000, resolvingPower: 5000, species: [{ species: ar, z: 1, currentA: 1e-10 }, { species: ar, z: 2, currentA: 8e-12 }], noiseA: 1e-16, seed: 3 })
    // 40Ca and 40K are isobars of 40Ar that R = 5000 cannot separate, so the candidates are
    // registered formulas only.
    const result = processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]', 'N2', 'CO2'] })
    const one = result.peaks.findIndex(p => p.assignment?.species === '[40Ar]' && p.assignment.z === 1)
    const two = result.peaks.findIndex(p => p.assignment?.species === '[40Ar]' && p.assignment.z === 2)
    expect(one).toBeGreaterThanOrEqual(0)
    expect(two).toBeGreaterThanOrEqual(0)
    expect(result.peaks[one]!.linkedPeak).toBe(two)
    expect(result.peaks[two]!.linkedPeak).toBe(one)
  })

  it('flags N2⁺ and CO⁺ at m/z 28 as ambiguous at R = 1000 and tells them apart at R = 5000 (common practice, no source)', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } })
    for (const [R, expectAmbiguous] of [[1000, true], [5000, false]] as const) {
      const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 3000, mzFrom: 27, mzTo: 29, points: 20_000, resolvingPower: R, species: [], noiseA: 1e-16, seed: 5 })
      // One line at the m/z of N2⁺ only, with CO registered as a candidate as well.
      const withN2 = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 3000, mzFrom: 27, mzTo: 29, points: 20_000, resolvingPower: R, species: [{ species: formulaSpecies('N2'), currentA: 1e-10 }], noiseA: 1e-16, seed: 5 })
      expect(raw.detectors[0]!.values.length).toBe(20_000)
      const result = processReadings(geo, withN2, { isotopes: false, formulas: ['N2', 'CO'] })
      expect(result.peaks).toHaveLength(1)
      expect(result.peaks[0]!.ambiguous).toBe(expectAmbiguous)
      if (!expectAmbiguous) expect(result.peaks[0]!.assignment!.species).toBe('N2')
    }
  })

  it('recovers a δ13C put into simulated CO2 within 0.05 ‰', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } })
    const vpdb = 0.0111802
    const delta = -27.4
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 3000, mzFrom: 43, mzTo: 46, points: 60_000, resolvingPower: 1000, species: [
      { species: formulaSpecies('CO2'), currentA: 5e-9 },
      { species: formulaSpecies('[13C]O2'), currentA: 5e-9 * vpdb * (1 + delta / 1000) },
    ], noiseA: 1e-15, seed: 9 })
    const result = processReadings(geo, raw, { isotopes: false, formulas: ['CO2', '[13C]O2'], ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }] })
    expect(result.ratios).toHaveLength(1)
    expect(Math.abs(result.ratios[0]!.deltaPermil - delta)).toBeLessThan(0.05)
    expect(result.ratios[0]!.deltaU).toBeGreaterThan(0)
  })
})
