// SequenceItem.cycles built from a static acquisition as posted (shared/engine/isotopes/staticCycles.ts):
// each collector's column through its registered detector (volts over the feedback resistor, I = V/R,
// Ohm's law) with its on-peak-zero baseline taken off cycle by cycle, keyed by the nominal m/z of the
// collector's static peak in the engine result, with the acquisition's `cycleSeconds`
// (shared/schemas/acquisitions.ts). Hand-computed values beside each check.
import { describe, expect, it } from 'vitest'
import { EngineError, fieldForMz, geometry, ionMz, isotope, processReadings } from '../../shared/engine'
import { processRatioSequence } from '../../shared/engine/isotopes/ratioSequence'
import { cyclesFromStaticReadings, nominalMzByCollector } from '../../shared/engine/isotopes/staticCycles'
import { acquisitionInput } from '../../shared/schemas/acquisitions'

const mz = (a: number) => ionMz(isotope(`${a}Ar`).mass, 1)
const rL = 0.3
const U = 5000
const faraday = (ohm: number) => ({ type: 'faraday', resistor: { value: ohm, unit: 'Ω' } })
// Collectors at m/z 36, 38, 40: r ∝ √(m/z) at one field (potential sector, non-relativistic to 1e-9).
const geo = geometry.parse({ kind: 'multi-collector', collectors: [
  { id: 'L', effectiveRadius: { value: rL, unit: 'm' }, detector: faraday(1e12) },
  { id: 'C', effectiveRadius: { value: rL * Math.sqrt(mz(38) / mz(36)), unit: 'm' }, detector: faraday(1e12) },
  { id: 'H', effectiveRadius: { value: rL * Math.sqrt(mz(40) / mz(36)), unit: 'm' }, detector: faraday(1e11) },
] })
const settings = { field: { value: fieldForMz(mz(36), rL, U), unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }
const t = [10, 20, 30, 40, 50, 60]
// Volts falling linearly with time (consumption): V(t) = V0·(1 − 0.001·t), plus an amplifier offset of 2 mV
// read on peak-zero every cycle.
const volts = (v0: number) => t.map(s => v0 * (1 - 0.001 * s) + 0.002)
const zero = t.map(() => 0.002)
const detectors = [
  { collector: 'L', unit: 'V', values: volts(0.05), baseline: zero },
  { collector: 'C', unit: 'V', values: volts(0.0094), baseline: zero },
  { collector: 'H', unit: 'V', values: volts(1.5), baseline: zero },
]

describe('cycles of a static acquisition for the time-zero step', () => {
  const result = processReadings(geo, { settings, detectors }, { formulas: ['[36Ar]', '[38Ar]', '[40Ar]'] })
  const collectorMz = nominalMzByCollector(result.peaks)

  it('maps each collector to the nominal m/z of its static peak in the engine result', () => {
    expect(result.mode).toBe('static')
    expect(collectorMz).toEqual({ L: '36', C: '38', H: '40' })
  })

  it('turns volts into amperes through each registered resistor, baseline off cycle by cycle, times carried', () => {
    const cycles = cyclesFromStaticReadings({ geometry: geo, detectors, cycleSeconds: t, collectorMz })
    expect(cycles.map(c => c.t)).toEqual(t)
    // Cycle 1 (t = 10 s): 40 on 1e11 Ω: 1.5·0.99 V / 1e11 Ω = 1.485e-11 A; 36 on 1e12 Ω: 0.0495 V → 4.95e-14 A.
    expect(cycles[0]!.beams['40']).toBeCloseTo(1.485e-11, 22)
    expect(cycles[0]!.beams['36']).toBeCloseTo(4.95e-14, 24)
    expect(cycles[5]!.beams['38']).toBeCloseTo(0.0094 * 0.94 / 1e12, 24)
    // Unnamed columns are the geometry's collectors in order, as the engine reads them.
    const unnamed = detectors.map(({ collector: _c, ...d }) => d)
    expect(cyclesFromStaticReadings({ geometry: geo, detectors: unnamed, cycleSeconds: t, collectorMz })).toEqual(cycles)
  })

  it('lets a time-zero method run on the acquisition: the intercept is the signal at the inlet', () => {
    const cycles = cyclesFromStaticReadings({ geometry: geo, detectors, cycleSeconds: t, collectorMz })
    const item = { position: 1, role: 'sample' as const, acquiredAt: Date.UTC(2026, 0, 5), beams: {}, ratios: {}, cycles }
    const out = processRatioSequence({ gas: 'Ar', steps: [{ step: 'time-zero', model: 'linear' }], acceptance: { minAnchors: 1 } }, [item], [])
    // Exactly linear data: 40/36 at t = 0 is (1.5/1e11)/(0.05/1e12) = 300; 38/36 = 0.0094/0.05 = 0.188.
    expect(out.items[0]!.final['40Ar/36Ar']!.value).toBeCloseTo(300, 9)
    expect(out.items[0]!.final['38Ar/36Ar']!.value).toBeCloseTo(0.188, 12)
  })

  it.each([
    ['times of another length', { cycleSeconds: t.slice(1) }, 'cycleSeconds', 'length-mismatch'],
    ['times not increasing', { cycleSeconds: [10, 20, 20, 40, 50, 60] }, 'cycleSeconds[2]', 'not-increasing'],
    ['a negative time', { cycleSeconds: [-1, 20, 30, 40, 50, 60] }, 'cycleSeconds[0]', 'not-finite'],
    ['a collector without an m/z', { collectorMz: { L: '36', C: '38' } }, 'detectors[2].collector', 'unknown-collector'],
    ['two columns on one m/z', { collectorMz: { L: '36', C: '36', H: '40' } }, 'detectors[1].collector', 'duplicate-mz'],
  ] as const)('refuses %s, naming the field', (_name, change, field, code) => {
    let error: unknown
    try { cyclesFromStaticReadings({ geometry: geo, detectors, cycleSeconds: t, collectorMz, ...change }) }
    catch (e) { error = e }
    expect(error).toBeInstanceOf(EngineError)
    expect((error as EngineError).field).toBe(field)
    expect((error as EngineError).code).toBe(code)
  })

  it('refuses a result with two collectors on one nominal m/z', () => {
    expect(() => nominalMzByCollector([{ collector: 'A', centroid: 39.96 }, { collector: 'B', centroid: 40.02 }])).toThrow(/both sit at m\/z 40/)
  })
})

describe('acquisition schema: cycleSeconds', () => {
  const body = { instrument: 'argus-1', runId: 'run-7', acquiredAt: '2026-12-01T10:00:00Z', settings, detectors }
  const issues = (b: unknown) => acquisitionInput.safeParse(b).error?.issues.map(i => [i.path.join('.'), i.message]) ?? []

  it('accepts one time per cycle, in order', () => {
    expect(acquisitionInput.safeParse({ ...body, cycleSeconds: t }).success).toBe(true)
    expect(acquisitionInput.shape.cycleSeconds.description).toMatch(/seconds since the gas was let in, one per cycle/)
  })

  it.each([
    ['another length', [10, 20, 30], ['cycleSeconds', 'has 3 times, detectors[0] has 6 cycles']],
    ['not increasing', [10, 20, 15, 40, 50, 60], ['cycleSeconds.2', 'must be later than the previous cycle']],
    ['negative', [-5, 20, 30, 40, 50, 60], ['cycleSeconds.0', 'cannot be negative']],
    ['not a number', [10, 20, '30', 40, 50, 60], ['cycleSeconds.2', 'must be a finite number']],
  ])('refuses times %s, naming the field', (_name, cycleSeconds, issue) => {
    expect(issues({ ...body, cycleSeconds })).toContainEqual(issue)
  })

  it('refuses cycle times on a sweep', () => {
    const sweep = { reading: 'field', unit: 'T', values: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6] }
    expect(issues({ ...body, sweep, detectors: [{ unit: 'A', values: [1, 2, 3, 4, 5, 6] }], cycleSeconds: t })).toContainEqual(['cycleSeconds', 'only static readings have cycles; a sweep or an m/z spectrum has none'])
  })
})
