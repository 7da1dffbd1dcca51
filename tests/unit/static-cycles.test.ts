// Static multi-collector ratios, statistically: data simulated from first principles
// (shared/engine/simulateStatic.ts: a beam fluctuation common to the cups, Schottky shot
// noise, Johnson–Nyquist noise of each amplifier's resistor, amplifier offsets measured by
// on-peak-zero or block baselines, Poisson counts with dead time) with the truth known.
//
// Acceptance, over N = 300 seeds: |mean bias| under half the mean stated u, and the fraction
// of seeds within 2u inside the binomial 99 % band around 0.95 (2u is the 95 % interval of a
// normal estimate, and of Student's t with the 59 degrees of freedom of 60 cycles, t₀.₉₇₅ =
// 2.001): 0.95 ± 2.576·√(0.95·0.05/300) = [0.9175, 0.9825] (normal approximation to the
// binomial; common practice).
import { describe, expect, it } from 'vitest'
import {
  deadTimeCorrected, EngineError, fieldForMz, geometry, ionMz, isotope, processReadings, seededNormal, simulateStatic,
  type SimCup, type StaticSimulation,
} from '../../shared/engine'

const SEEDS = 300
const BAND: [number, number] = [0.95 - 2.576 * Math.sqrt(0.95 * 0.05 / SEEDS), 0.95 + 2.576 * Math.sqrt(0.95 * 0.05 / SEEDS)]
const R_TRUE = 298.56 // 40Ar/36Ar of air, Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507 (from memory); any truth would do
const mzL = ionMz(isotope('36Ar').mass, 1)
const mzH = ionMz(isotope('40Ar').mass, 1)
const rL = 0.3
const rH = rL * Math.sqrt(mzH / mzL)
const U = 5000
const B = fieldForMz(mzL, rL, U)
const settings = { field: { value: B, unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }
const options = { formulas: ['[36Ar]', '[40Ar]'], ratios: [{ id: 'AIR:40Ar/36Ar' as const, heavy: '[40Ar]', light: '[36Ar]' }] }

type Detector = Record<string, unknown> | undefined
function geo(light: Detector, heavy: Detector) {
  return geometry.parse({ kind: 'multi-collector', collectors: [
    { id: 'L', effectiveRadius: { value: rL, unit: 'm' }, ...(light ? { detector: light } : {}) },
    { id: 'H', effectiveRadius: { value: rH, unit: 'm' }, ...(heavy ? { detector: heavy } : {}) },
  ] })
}

interface Run { ratio: number, u: number, se: number, rejected: number, qc: string[] }
function run(g: ReturnType<typeof geo>, sim: StaticSimulation): Run {
  const data = simulateStatic(sim)
  const res = processReadings(g, { settings, detectors: data.detectors }, options)
  const r = res.ratios[0]!
  return { ratio: r.ratio, u: r.ratioU, se: r.cycles!.se, rejected: r.cycles!.rejected, qc: res.qc.map(f => f.code) }
}

function summarise(runs: Run[], truth: number) {
  const bias = runs.reduce((s, r) => s + (r.ratio - truth), 0) / runs.length
  const meanU = runs.reduce((s, r) => s + r.u, 0) / runs.length
  const within = runs.filter(r => Math.abs(r.ratio - truth) <= 2 * r.u).length / runs.length
  return { bias, meanU, within }
}

function expectHonest(s: ReturnType<typeof summarise>) {
  expect(Math.abs(s.bias)).toBeLessThan(s.meanU / 2)
  expect(s.within).toBeGreaterThanOrEqual(BAND[0])
  expect(s.within).toBeLessThanOrEqual(BAND[1])
}

const faradayCups = (offsetA: number, readAs: 'A' | 'V' = 'A', gains: [number, number] = [1, 1]): SimCup[] => [
  { id: 'L', relative: 1, detector: { type: 'faraday', resistorOhm: 1e11, offsetA, readAs, gain: gains[0] } },
  { id: 'H', relative: R_TRUE, detector: { type: 'faraday', resistorOhm: 1e10, offsetA: -offsetA, readAs, gain: gains[1] } },
]
const base = { cycles: 60, integrationS: 4, lightSignal: 1e-12, commonFluctuation: 0.02 }

describe('a static reading has no profile', () => {
  it('width and resolving power are not estimated: null, as their u (not 0)', () => {
    const data = simulateStatic({ ...base, seed: 1, baseline: { mode: 'per-cycle' }, cups: faradayCups(3e-15) })
    const peaks = processReadings(geo(undefined, undefined), { settings, detectors: data.detectors }, options).peaks
    expect(peaks.map(p => [p.fwhm, p.fwhmU, p.resolvingPower, p.resolvingPowerU, p.resolvingPower10Valley])).toEqual([[null, null, null, null, null], [null, null, null, null, null]])
  })
})

describe('static multi-collector ratios, cycle by cycle (300 seeds each)', () => {
  it('a 2 % beam fluctuation common to the cups cancels: unbiased, ~95 % within 2u, u near the cycle standard error', () => {
    const g = geo(undefined, undefined)
    const runs = Array.from({ length: SEEDS }, (_, i) => run(g, { ...base, seed: i + 1, baseline: { mode: 'per-cycle' }, cups: faradayCups(3e-15) }))
    const s = summarise(runs, R_TRUE)
    expectHonest(s)
    // Engine 1 stated about 110 times the cycle standard error on these data (see DEVELOPERS.md).
    const ratioToSe = runs.reduce((a, r) => a + r.u / r.se, 0) / runs.length
    expect(ratioToSe).toBeLessThan(1.01)
    expect(ratioToSe).toBeGreaterThan(0.999)
  })

  it('amplifier offsets measured by a block of off-peak readings: the block mean is subtracted and its u propagated', () => {
    const g = geo(undefined, undefined)
    const runs = Array.from({ length: SEEDS }, (_, i) => run(g, { ...base, seed: 1000 + i, baseline: { mode: 'block', readings: 20 }, cups: faradayCups(3e-15) }))
    expectHonest(summarise(runs, R_TRUE))
  })

  it('without baseline readings a 3 fA offset biases the ratio far beyond its u (what the baseline input is for)', () => {
    const g = geo(undefined, undefined)
    const runs = Array.from({ length: 50 }, (_, i) => run(g, { ...base, seed: 2000 + i, baseline: { mode: 'none' }, cups: faradayCups(3e-15) }))
    const s = summarise(runs, R_TRUE)
    expect(Math.abs(s.bias)).toBeGreaterThan(10 * s.meanU)
  })

  it('volts through registered resistors and gain factors whose registered values are off by their stated u: still ~95 % within 2u', () => {
    const normal = seededNormal(77)
    const runs = Array.from({ length: SEEDS }, (_, i) => {
      // The registered resistor and gain differ from the true ones by draws of their stated u.
      const uRel = 2e-4
      const reg = (v: number) => v * (1 + uRel * normal())
      const g = geo(
        { type: 'faraday', resistor: { value: reg(1e11), unit: 'Ω', u: 1e11 * uRel }, gain: { value: reg(1.0021), u: 1.0021 * uRel } },
        { type: 'faraday', resistor: { value: reg(1e10) / 1e9, unit: 'GΩ', u: 10 * uRel }, gain: { value: reg(0.9987), u: 0.9987 * uRel } },
      )
      return run(g, { ...base, seed: 3000 + i, baseline: { mode: 'per-cycle' }, cups: faradayCups(3e-15, 'V', [1.0021, 0.9987]) })
    })
    const s = summarise(runs, R_TRUE)
    expectHonest(s)
    // The systematic part dominates here: u is well above the cycle standard error.
    expect(runs[0]!.u).toBeGreaterThan(2 * runs[0]!.se)
  })

  it('a discharge spike in 3 % of cycles is set aside by Tukey\'s fences, and the ratio stays unbiased', () => {
    const g = geo(undefined, undefined)
    const runs = Array.from({ length: SEEDS }, (_, i) => run(g, { ...base, commonFluctuation: 0, seed: 4000 + i, spikeRate: 0.03, spikeSize: 0.01, baseline: { mode: 'per-cycle' }, cups: faradayCups(0) }))
    expect(runs.reduce((a, r) => a + r.rejected, 0) / runs.length).toBeGreaterThan(0.5)
    expect(runs.some(r => r.qc.includes('cycles-rejected'))).toBe(true)
    expect(Math.abs(summarise(runs, R_TRUE).bias)).toBeLessThan(summarise(runs, R_TRUE).meanU / 2)
  })
})

describe('ion counters with dead time (Knoll, Radiation Detection and Measurement, 4th ed., 2010, §4.VII)', () => {
  it.each(['non-paralysable', 'paralysable'] as const)('%s: counts with a dwell time, τ registered off by its u, 300 seeds honest', (model) => {
    const tau = 20e-9
    const uTau = 1e-9
    const normal = seededNormal(model.length)
    const cups: SimCup[] = [
      { id: 'L', relative: 1, detector: { type: 'ion-counter', deadTimeS: tau, model, darkCps: 0.2 } },
      { id: 'H', relative: 0.1, detector: { type: 'ion-counter', deadTimeS: tau, model, darkCps: 0.2 } },
    ]
    const runs = Array.from({ length: SEEDS }, (_, i) => {
      const det = () => ({ type: 'ion-counter', deadTime: { value: (tau + uTau * normal()) * 1e9, unit: 'ns', u: uTau * 1e9 }, model })
      return run(geo(det(), det()), { cycles: 60, integrationS: 4, lightSignal: 2e5, commonFluctuation: 0.02, seed: 5000 + i, baseline: { mode: 'block', readings: 30 }, cups })
    })
    expectHonest(summarise(runs, 0.1))
  })

  it('counts from a collector with no ion counter registered are not dead-time corrected: biased, and flagged', () => {
    const cups: SimCup[] = [
      { id: 'L', relative: 1, detector: { type: 'ion-counter', deadTimeS: 20e-9, model: 'non-paralysable' } },
      { id: 'H', relative: 0.1, detector: { type: 'ion-counter', deadTimeS: 20e-9, model: 'non-paralysable' } },
    ]
    const runs = Array.from({ length: 40 }, (_, i) => run(geo(undefined, undefined), { cycles: 60, integrationS: 4, lightSignal: 2e5, commonFluctuation: 0.02, seed: 6000 + i, cups }))
    const s = summarise(runs, 0.1)
    expect(Math.abs(s.bias)).toBeGreaterThan(4 * s.meanU)
    expect(runs[0]!.qc).toContain('dead-time-not-corrected')
  })

  it.each([
    [1e5, 20e-9], [1e6, 50e-9], [3e6, 100e-9],
  ])('the models invert their own forward laws exactly (n = %f s⁻¹, τ = %f s)', (n, tau) => {
    expect(deadTimeCorrected(n / (1 + n * tau), tau, 'non-paralysable', 'x') / n - 1).toBeCloseTo(0, 12)
    expect(deadTimeCorrected(n * Math.exp(-n * tau), tau, 'paralysable', 'x') / n - 1).toBeCloseTo(0, 12)
  })

  it('a recorded rate beyond the counter\'s reach is refused, naming the reading', () => {
    expect(() => deadTimeCorrected(6e7, 20e-9, 'non-paralysable', 'detectors[0].values[3]')).toThrow(EngineError)
    expect(() => deadTimeCorrected(2e7, 20e-9, 'paralysable', 'detectors[0].values[3]')).toThrow(/saturated/)
  })
})

describe('detector registration', () => {
  it('readings in volts without a registered resistor are refused, naming the field', () => {
    try {
      processReadings(geo(undefined, undefined), { settings, detectors: [{ collector: 'L', unit: 'V', values: [0.1, 0.1] }, { collector: 'H', unit: 'V', values: [2.9, 2.9] }] }, options)
      expect.unreachable()
    }
    catch (error) {
      expect(error).toBeInstanceOf(EngineError)
      expect((error as EngineError).field).toBe('detectors[0].unit')
      expect((error as EngineError).code).toBe('resistor-missing')
    }
  })

  it('raw counts need a dwell time', () => {
    const g = geo({ type: 'ion-counter', deadTime: { value: 20, unit: 'ns', u: 1 }, model: 'paralysable' }, undefined)
    expect(() => processReadings(g, { settings, detectors: [{ collector: 'L', unit: 'counts', values: [10, 12] }] }, options)).toThrow(/dwell/)
  })

  it('the geometry schema is strict: an unknown detector key is refused', () => {
    const r = geometry.safeParse({ kind: 'multi-collector', collectors: [{ id: 'L', effectiveRadius: { value: 0.3, unit: 'm' }, detector: { type: 'faraday', resistor: { value: 1e11, unit: 'Ω' }, extra: 1 } }] })
    expect(r.success).toBe(false)
  })
})
