// m/z from the sector relations of DESIGN.md, computed here independently from CODATA
// constants (typed here, not imported) and AME2020 masses, against the engine's conversion
// of the same readings. Engine 2: CODATA 2022 and the exact relativistic relations (Jackson,
// Classical Electrodynamics, 3rd ed., Wiley 1999, §12.1: p = γmv, (pc)² = T² + 2T·mc²);
// engine 1.x compatibility: CODATA 2018, non-relativistic.
import { describe, expect, it } from 'vitest'
import { geometry, ionMz, isotope, PHYSICS_1X, simulateFieldSweep, staticCollectorMz, sweepToMz, type RawReadings } from '../../shared/engine'

// e exact (SI 2019); c exact; m_u: CODATA 2022 (Mohr et al., Rev. Mod. Phys. 97 (2025) 025002)
// and CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010).
const e = 1.602176634e-19
const c = 299792458
const mu = 1.66053906892e-27
const mu2018 = 1.6605390666e-27

describe('accelerating-potential sector: (qrB)² = 2mqU + (qU/c)² (relativistic)', () => {
  it('puts 40Ar⁺ at its m/z when the field is the one the exact relation gives', () => {
    const r = 0.12
    const U = 4500
    const mzAr = ionMz(isotope('40Ar').mass, 1)
    // p = √(2 m qU + (qU/c)²) and r = p/(qB), per unit charge
    const B = Math.sqrt(2 * U * mzAr * mu / e + (U / c) ** 2) / r
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm' } })
    const readings: RawReadings = { settings: { acceleratingVoltage: { value: 4.5, unit: 'kV' } }, sweep: { reading: 'field', values: [B * 1e4, B * 1e4 * 1.001], unit: 'G' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]! / mzAr - 1).toBeCloseTo(0, 12)
  })

  it('the simulator steps the field by the same exact relation, so its truth is the engine\'s m/z (4He⁺ at 10 kV)', () => {
    // The relativistic term is largest for light ions at high potential: (U/c)²/(2U·m/q) is
    // 1.3 ppm for 4He⁺ at 10 kV; a simulator without it put its sweep 1.3 ppm off.
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm' } })
    const mzHe = ionMz(isotope('4He').mass, 1)
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 10_000, mzFrom: mzHe, mzTo: mzHe + 0.5, points: 101, resolvingPower: 500, species: [] })
    const { mz } = sweepToMz(geo, { ...raw, settings: { acceleratingVoltage: { value: 10, unit: 'kV' } } })
    const first = mz[0]! < mz[mz.length - 1]! ? mz[0]! : mz[mz.length - 1]!
    expect(Math.abs(first / mzHe - 1)).toBeLessThan(1e-11)
    // Independently of the engine: the field at the first point is the exact relation's.
    const B = Math.sqrt(2 * 10_000 * mzHe * mu / e + (10_000 / c) ** 2) / 0.12
    expect(Math.abs(raw.sweep!.values[0]! / B - 1)).toBeLessThan(1e-11)
  })

  it('engine 1.x compatibility: CODATA 2018 and m/q = (rB)²/2U, as engine 1.0.0 computed', () => {
    const r = 0.12
    const U = 4500
    const mzAr = ionMz(isotope('40Ar').mass, 1)
    const B = Math.sqrt(2 * U * mzAr * mu2018 / e) / r
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm' } })
    const readings: RawReadings = { settings: { acceleratingVoltage: { value: 4.5, unit: 'kV' } }, sweep: { reading: 'field', values: [B * 1e4, B * 1e4 * 1.001], unit: 'G' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings, undefined, PHYSICS_1X)
    expect(mz[0]! / mzAr - 1).toBeCloseTo(0, 12)
    expect(mz[1]! / mz[0]!).toBeCloseTo(1.001 ** 2, 12) // m/z grows with B²
  })

  // Hand calculation: the non-relativistic m/q overstates m/q by U/(2c²), relatively
  // U/(2c²) / (m/q) = qU / (2 m c²): for 4He⁺ (m/z 4.00206) at 10 kV, 10⁴ / (2 · 4.00206 ·
  // 931.494 MeV) = 1.341 ppm; for ¹H⁺ (m/z 1.00728) at 10 kV, 5.33 ppm (m_u c² = 931.494 10242 MeV, CODATA 2022).
  it.each([
    ['4He', 1.341],
    ['1H', 5.329],
  ])('%s⁺ at 10 kV: the relativistic correction is %f ppm (hand calculation)', (label, ppm) => {
    const mz = ionMz(isotope(label).mass, 1)
    const U = 10_000
    const r = 0.3
    const B = Math.sqrt(2 * U * mz * mu / e + (U / c) ** 2) / r
    const geo = geometry.parse({ kind: 'multi-collector', collectors: [{ id: 'C', effectiveRadius: { value: r, unit: 'm' } }] })
    const settings = { field: { value: B, unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }
    const [exact] = staticCollectorMz(geo, { settings, detectors: [] })
    expect(exact!.mz / mz - 1).toBeCloseTo(0, 12)
    // The same reading with the non-relativistic relation (and the same constants) reads high by the correction.
    const nonRel = (r * B) ** 2 / (2 * U) * e / mu
    expect((nonRel / exact!.mz - 1) * 1e6).toBeCloseTo(ppm, 2)
    const handPpm = U / (2 * mz * 931.49410372e6) * 1e6
    expect(handPpm).toBeCloseTo(ppm, 2)
  })

  it('a voltage sweep at fixed field: m/z = (rB)²/2U − U/2c², falling as 1/U', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.2, unit: 'm' } })
    const readings: RawReadings = { settings: { field: { value: 0.5, unit: 'T' } }, sweep: { reading: 'acceleratingVoltage', values: [2000, 4000], unit: 'V' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]! / (((0.2 * 0.5) ** 2 / (2 * 2000) - 2000 / (2 * c * c)) * e / mu) - 1).toBeCloseTo(0, 12)
    const old = sweepToMz(geo, readings, undefined, PHYSICS_1X).mz
    expect(old[0]).toBeCloseTo((0.2 * 0.5) ** 2 / (2 * 2000) * e / mu2018, 8)
    expect(old[0]! / old[1]!).toBeCloseTo(2, 12)
  })
})

describe('Wien filter before the sector: v = E/B_f, m/q = rB/(γv)', () => {
  it('agrees with the exact potential-sector relation for ions whose velocity the filter passes', () => {
    const mzKr = ionMz(isotope('84Kr').mass, 1)
    const U = 3000
    const m = mzKr * mu / e // m/q in kg/C
    // Exact: γ = 1 + qU/(mc²), v = c√(1 − 1/γ²)
    const gamma = 1 + U / (m * c * c)
    const v = c * Math.sqrt(1 - 1 / gamma ** 2)
    const d = 0.005
    const Bf = 0.08
    const V = v * Bf * d // plates set so that E/B_f = v
    const r = 0.25
    const B = gamma * m * v / r
    const geo = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 250, unit: 'mm' }, plateGap: { value: 5, unit: 'mm' } })
    const readings: RawReadings = { settings: { plateVoltage: { value: V, unit: 'V' }, filterField: { value: Bf * 1e3, unit: 'mT' } }, sweep: { reading: 'field', values: [B, B * 1.01], unit: 'T' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]! / mzKr - 1).toBeCloseTo(0, 12)
    expect(mz[1]! / mz[0]!).toBeCloseTo(1.01, 12) // linear in B
    // Without γ the same readings read high by (γ − 1) ≈ qU/(mc²): 0.0383 ppm for 84Kr⁺ at 3 kV.
    const nonRel = sweepToMz(geo, readings, undefined, { ...PHYSICS_1X, constants: { ...PHYSICS_1X.constants, atomicMassConstantKg: mu } }).mz
    expect((nonRel[0]! / mz[0]! - 1)).toBeCloseTo(gamma - 1, 12)
  })
})

describe('multi-collector: one m/z per collector radius', () => {
  it('collectors at r and r·√(45/44) see m/z 44 and 45 together, to the relativistic term', () => {
    const r44 = 0.3
    const geo = geometry.parse({ kind: 'multi-collector', collectors: [
      { id: 'C44', effectiveRadius: { value: r44, unit: 'm' } },
      { id: 'C45', effectiveRadius: { value: r44 * Math.sqrt(45 / 44), unit: 'm' } },
    ] })
    const U = 2500
    const B = Math.sqrt(2 * U * 44 * mu / e + (U / c) ** 2) / r44
    const [a, b] = staticCollectorMz(geo, { settings: { field: { value: B, unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }, detectors: [] })
    expect(a!.mz).toBeCloseTo(44, 9)
    // (r45 B)² = (45/44)(r44 B)², so m/q45 = 45/44 · (m/q44 + U/2c²) − U/2c²
    const k = U / (2 * c * c) * e / mu
    expect(b!.mz).toBeCloseTo(45 / 44 * (44 + k) - k, 9)
  })
})
