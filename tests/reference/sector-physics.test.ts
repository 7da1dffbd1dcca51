// m/z from the sector relations of DESIGN.md, computed here independently from CODATA 2018
// constants and AME2020 masses, against the engine's conversion of the same readings.
import { describe, expect, it } from 'vitest'
import { geometry, ionMz, isotope, staticCollectorMz, sweepToMz, type RawReadings } from '../../shared/engine'

// CODATA 2018 (typed here, not imported from the engine).
const e = 1.602176634e-19
const mu = 1.6605390666e-27

describe('accelerating-potential sector: m/q = (rB)² / 2U', () => {
  it('puts 40Ar⁺ at its m/z when the field is the one the relation gives', () => {
    const r = 0.12
    const U = 4500
    const mzAr = ionMz(isotope('40Ar').mass, 1)
    const B = Math.sqrt(2 * U * mzAr * mu / e) / r // from qU = mv²/2 and r = mv/(qB)
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm' } })
    const readings: RawReadings = { settings: { acceleratingVoltage: { value: 4.5, unit: 'kV' } }, sweep: { reading: 'field', values: [B * 1e4, B * 1e4 * 1.001], unit: 'G' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]! / mzAr - 1).toBeCloseTo(0, 12)
    expect(mz[1]! / mz[0]!).toBeCloseTo(1.001 ** 2, 12) // m/z grows with B²
  })

  it('a voltage sweep at fixed field: m/z falls as 1/U', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.2, unit: 'm' } })
    const readings: RawReadings = { settings: { field: { value: 0.5, unit: 'T' } }, sweep: { reading: 'acceleratingVoltage', values: [2000, 4000], unit: 'V' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]).toBeCloseTo((0.2 * 0.5) ** 2 / (2 * 2000) * e / mu, 8)
    expect(mz[0]! / mz[1]!).toBeCloseTo(2, 12)
  })
})

describe('Wien filter before the sector: v = E/B_f, m/q = rB/v', () => {
  it('agrees with the potential-sector relation for ions whose velocity the filter passes', () => {
    const mzKr = ionMz(isotope('84Kr').mass, 1)
    const U = 3000
    const v = Math.sqrt(2 * e * U / (mzKr * mu)) // velocity after acceleration
    const d = 0.005
    const Bf = 0.08
    const V = v * Bf * d // plates set so that E/B_f = v
    const r = 0.25
    const B = mzKr * mu / e * v / r
    const geo = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 250, unit: 'mm' }, plateGap: { value: 5, unit: 'mm' } })
    const readings: RawReadings = { settings: { plateVoltage: { value: V, unit: 'V' }, filterField: { value: Bf * 1e3, unit: 'mT' } }, sweep: { reading: 'field', values: [B, B * 1.01], unit: 'T' }, detectors: [] }
    const { mz } = sweepToMz(geo, readings)
    expect(mz[0]! / mzKr - 1).toBeCloseTo(0, 10)
    expect(mz[1]! / mz[0]!).toBeCloseTo(1.01, 12) // linear in B
  })
})

describe('multi-collector: one m/z per collector radius', () => {
  it('collectors at r and r·√(45/44) see m/z 44 and 45 together (m/z ∝ r²)', () => {
    const r44 = 0.3
    const geo = geometry.parse({ kind: 'multi-collector', collectors: [
      { id: 'C44', effectiveRadius: { value: r44, unit: 'm' } },
      { id: 'C45', effectiveRadius: { value: r44 * Math.sqrt(45 / 44), unit: 'm' } },
    ] })
    const U = 2500
    const B = Math.sqrt(2 * U * 44 * mu / e) / r44
    const [a, b] = staticCollectorMz(geo, { settings: { field: { value: B, unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }, detectors: [] })
    expect(a!.mz).toBeCloseTo(44, 9)
    expect(b!.mz).toBeCloseTo(45, 9)
  })
})
