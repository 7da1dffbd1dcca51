import { describe, expect, it } from 'vitest'
import { decodeArrays, encodeArrays } from '../../server/services/store/arrays'

// The arrays object (server/services/store/arrays.ts): a parsed acquisition body with its
// arrays as float64, little-endian, after a JSON header.
describe('arrays object', () => {
  const body = {
    instrument: 'sector-1', runId: 'r-1', acquiredAt: '2026-12-01T10:00:00Z',
    settings: { acceleratingVoltage: { value: 3000, unit: 'V', u: 0.5 } },
    sweep: { reading: 'field', unit: 'T', values: [0.1, 0.2000000000000001, -0, 1e-300, 5e300] },
    detectors: [{ collector: 'H1', unit: 'A', values: [1.5e-12, 2.5e-12, 0, -3e-15, 7] }],
    cycleSeconds: [0, 12.5],
    processing: { formulas: ['CO2'], tolerancePpm: 50 },
  }

  it('gives the body back exactly, every float64 bit included', () => {
    const back = decodeArrays<typeof body>(encodeArrays(body))
    expect(back).toEqual(body)
    expect(Object.is(back.sweep.values[2], -0)).toBe(true)
    expect(back.sweep.values[1]).toBe(0.2000000000000001)
  })

  it('stores the arrays as little-endian float64 after an 8-byte aligned header', () => {
    const data = encodeArrays(body)
    expect(data.subarray(0, 8).toString('ascii')).toBe('ARCWARR1')
    const start = Math.ceil((12 + data.readUInt32LE(8)) / 8) * 8
    expect(start % 8).toBe(0)
    // The first array found in the body is the sweep.
    expect(data.readDoubleLE(start)).toBe(0.1)
    expect(data.length).toBe(start + 8 * (5 + 5 + 2))
  })

  it('is deterministic (the same body, the same bytes, one object in the store) and differs when a value does', () => {
    expect(encodeArrays(body).equals(encodeArrays(structuredClone(body)))).toBe(true)
    const other = structuredClone(body)
    other.detectors[0]!.values[4] = 7.000000000000001
    expect(encodeArrays(other).equals(encodeArrays(body))).toBe(false)
  })

  it('refuses what is not an arrays object, and one cut short', () => {
    expect(() => decodeArrays(Buffer.from('{"runId":"x"}'))).toThrow(/not an Arcwise arrays object/)
    const data = encodeArrays(body)
    expect(() => decodeArrays(data.subarray(0, data.length - 8))).toThrow(/header describes/)
  })
})
