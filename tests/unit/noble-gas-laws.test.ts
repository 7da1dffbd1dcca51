// Mass-bias laws and the argon ratio sequence, by worked examples. The laws are those of
// Russell, Papanastassiou & Tombrello, Geochim. Cosmochim. Acta 42 (1978) 1075 (linear, power,
// exponential) and Wasserburg et al., Geochim. Cosmochim. Acta 45 (1981) 2311 (exponential);
// masses AME2020 (Wang et al., Chin. Phys. C 45 (2021) 030003) through the engine's table;
// atmospheric argon Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507 (from memory).
import { describe, expect, it } from 'vitest'
import { EngineError } from '../../shared/engine/errors'
import { isotope } from '../../shared/engine/species'
import {
  ATMOSPHERIC_ARGON, correctionFactor, correctRatio, fractionationFromReference, fractionationParameter, isotopeRatio, type MassBiasLaw,
} from '../../shared/engine/isotopes/massBias'
import { blankLevels } from '../../shared/engine/isotopes/blank'
import { processRatioSequence } from '../../shared/engine/isotopes/ratioSequence'
import { simulateArgonSequence } from '../../shared/engine/isotopes/simulateNobleGas'
import type { MethodDefinition } from '../../shared/schemas/methods'

const r4036 = isotopeRatio('40/36', 'Ar')
const r3836 = isotopeRatio('38/36', 'Ar')
const air = ATMOSPHERIC_ARGON.values

describe('mass-bias laws (Russell et al. 1978; Wasserburg et al. 1981)', () => {
  it('uses AME2020 atomic masses, not nominal masses', () => {
    // AME2020 (Wang et al. 2021): 36Ar 35.967545105 u, 38Ar 37.96273211 u, 40Ar 39.9623831237 u.
    expect(r4036.mNum).toBeCloseTo(39.9623831237, 9)
    expect(r4036.mDen).toBeCloseTo(35.967545105, 9)
    expect(r3836.mNum).toBeCloseTo(37.96273211, 8)
    expect(isotope('40Ar').mass).not.toBe(40)
  })

  // Hand-computed: air measured at 40Ar/36Ar = 290.0 against 298.56, so x = 298.56/290 = 1.0295172;
  // ln x = 0.0290900, Δm(40−36) = 3.994838 u, Δm(38−36) = 1.995187 u, ln(m40/m36) = 0.1053216,
  // ln(m38/m36) = 0.0539879 (AME2020 masses above).
  //   linear:      ε = 0.0295172/3.994838 = 0.0073888 /u;  K(38/36) = 1 + ε·1.995187 = 1.014742
  //   power:       ε = x^(1/3.994838) − 1 = 0.0073085 /u;  K(38/36) = x^0.4994359 = 1.014635
  //   exponential: β = 0.0290900/0.1053216 = 0.276202;     K(38/36) = e^(β·0.0539879) = 1.015023
  it.each([
    ['linear', 0.0073888, 1.014742],
    ['power', 0.0073085, 1.014635],
    ['exponential', 0.276202, 1.015023],
  ] as [MassBiasLaw, number, number][])('%s law: parameter and 38/36 factor from air 40/36 (hand-computed)', (law, parameter, k38) => {
    const p = fractionationParameter(law, 298.56 / 290, r4036)
    expect(p).toBeCloseTo(parameter, law === 'exponential' ? 5 : 7)
    expect(correctionFactor(law, p, r3836)).toBeCloseTo(k38, 5)
    // The reference ratio itself comes back at its known value under every law.
    expect(290 * correctionFactor(law, p, r4036)).toBeCloseTo(298.56, 9)
  })

  it('linear and power laws part at second order in the fractionation, the exponential law already at first (Russell et al. 1978)', () => {
    const k = (law: MassBiasLaw, x: number) => correctionFactor(law, fractionationParameter(law, x, r4036), r3836)
    // x − 1 = 1e-3: linear vs power ≈ ½·(Δm38/Δm40)(1 − Δm38/Δm40)(x − 1)² ≈ 1.2e-7; exponential vs power
    // ≈ (ln(m38/m36)/ln(m40/m36) − Δm38/Δm40)·(x − 1) = (0.512600 − 0.499436)·1e-3 = 1.32e-5 (hand-computed).
    expect(Math.abs(k('linear', 1.001) - k('power', 1.001))).toBeLessThan(3e-7)
    expect(Math.abs(k('exponential', 1.001) - k('power', 1.001))).toBeCloseTo(1.32e-5, 6)
  })

  it('propagates u with the shared-denominator covariance (GUM 5.2.2), checked by Monte Carlo (JCGM 101:2008)', () => {
    // 40/36 and 38/36 of one acquisition over the same 36 beam: beams with known u, correlated ratios.
    const b = { 36: { value: 1e-13, u: 4e-16 }, 38: { value: 1.85e-14, u: 5e-17 }, 40: { value: 2.9e-11, u: 3e-15 } }
    const rel36 = b[36].u / b[36].value
    const m40 = { value: b[40].value / b[36].value, u: (b[40].value / b[36].value) * Math.hypot(b[40].u / b[40].value, rel36) }
    const m38 = { value: b[38].value / b[36].value, u: (b[38].value / b[36].value) * Math.hypot(b[38].u / b[38].value, rel36) }
    const c = correctRatio({ law: 'exponential', measured: m40, target: r4036, referenceMeasured: m38, referenceKnown: { value: 0.1885, u: 0 }, ref: r3836, relativeCovariance: rel36 ** 2 })
    // Monte Carlo of the same model from the beams (seeded Box–Muller).
    let seed = 12345
    const uni = () => { seed = (seed * 1103515245 + 12345) % 2147483648; return (seed + 1) / 2147483649 }
    const gauss = () => Math.sqrt(-2 * Math.log(uni())) * Math.cos(2 * Math.PI * uni())
    const draws: number[] = []
    for (let i = 0; i < 40_000; i++) {
      const i36 = b[36].value + b[36].u * gauss()
      const i38 = b[38].value + b[38].u * gauss()
      const i40 = b[40].value + b[40].u * gauss()
      const beta = Math.log(0.1885 / (i38 / i36)) / Math.log(r3836.mNum / r3836.mDen)
      draws.push((i40 / i36) * (r4036.mNum / r4036.mDen) ** beta)
    }
    const mean = draws.reduce((s, v) => s + v, 0) / draws.length
    const sd = Math.sqrt(draws.reduce((s, v) => s + (v - mean) ** 2, 0) / (draws.length - 1))
    expect(c.u / sd).toBeGreaterThan(0.97)
    expect(c.u / sd).toBeLessThan(1.03)
    // Dropping the covariance would overstate u here by more than half.
    const dropped = correctRatio({ law: 'exponential', measured: m40, target: r4036, referenceMeasured: m38, referenceKnown: { value: 0.1885, u: 0 }, ref: r3836 })
    expect(dropped.u / sd).toBeGreaterThan(1.5)
  })

  it('gives the fractionation parameter with its u from the known and measured values', () => {
    const beta = fractionationFromReference('exponential', { value: 290, u: 0.29 }, air['40Ar/36Ar']!, r4036)
    expect(beta.value).toBeCloseTo(0.276202, 5)
    // u(β) = √(u_rel²(known) + u_rel²(measured)) / ln(m40/m36) = √((0.31/298.56)² + 0.001²)/0.1053216 = 0.0136873.
    expect(beta.u).toBeCloseTo(0.0136873, 6)
  })

  it('refuses a ratio that is not of nominal masses or names an isotope the table lacks', () => {
    expect(() => isotopeRatio('40-36', 'Ar')).toThrow(EngineError)
    expect(() => isotopeRatio('99/36', 'Ar')).toThrow(/isotope/)
  })
})

describe('procedural blank (mean of the blanks; u of a new draw, max(s, rms u_i)·√(1 + 1/n), Draper & Smith 1998, ch. 1)', () => {
  it('averages each beam over the blanks, with u from their scatter, or from the blanks\' own u when that is larger', () => {
    // Hand-computed: 1.0, 1.2, 1.4 → mean 1.2, s = 0.2 > rms u_i = 0.01, u = 0.2·√(1 + 1/3) = 0.2309401, ν = 2.
    const m = (value: number, u = 0.01) => ({ value, u })
    const levels = blankLevels([{ 36: m(1.0), 40: m(5) }, { 36: m(1.2), 40: m(5) }, { 36: m(1.4) }])
    expect(levels['36']!.value).toBeCloseTo(1.2, 12)
    expect(levels['36']!.u).toBeCloseTo(0.2309401, 7)
    expect(levels['36']!).toMatchObject({ n: 3, basis: 'scatter', dof: 2 })
    // A beam one blank lacks has no blank level (nothing is subtracted from it).
    expect(levels['40']).toBeUndefined()
    // 1.00 and 1.02 scatter by s = 0.0141 < their own u = 0.05: u = 0.05·√1.5 = 0.0612372; ν of two u with
    // 8 degrees of freedom each: (2·0.05²)²/(2·0.05⁴/8) = 16 (GUM G.4.1).
    const own = blankLevels([{ 36: m(1.0, 0.05) }, { 36: m(1.02, 0.05) }], [{ 36: 8 }, { 36: 8 }])['36']!
    expect(own.u).toBeCloseTo(0.0612372, 7)
    expect(own.basis).toBe('stated')
    expect(own.dof).toBeCloseTo(16, 9)
    // One blank: its own u, as a new draw, √2 × (4.2426407e-17); no degrees of freedom stated.
    const one = blankLevels([{ 36: { value: 2e-16, u: 3e-17 } }])['36']!
    expect(one).toMatchObject({ value: 2e-16, n: 1, basis: 'stated', dof: Number.POSITIVE_INFINITY })
    expect(one.u).toBeCloseTo(4.2426407e-17, 23)
  })
})

const bracketing: MethodDefinition = {
  gas: 'Ar',
  steps: [{ step: 'time-zero', model: 'linear' }, { step: 'blank' }, { step: 'mass-bias', law: 'exponential', against: 'standard', material: 'AIR-Ar' }],
  acceptance: { minAnchors: 2, maxStandardResidual: 20 },
}
const layout = [
  { role: 'blank' }, { role: 'working-standard', material: 'AIR-Ar' }, { role: 'sample', truth: { '40/36': 1200, '38/36': 0.19 } },
  { role: 'working-standard', material: 'AIR-Ar' }, { role: 'monitoring-standard', material: 'AIR-Ar' }, { role: 'working-standard', material: 'AIR-Ar' }, { role: 'blank' },
] as const

describe('argon sequences (processRatioSequence)', () => {
  it('corrects an air monitoring standard back to the air ratios within its stated uncertainty (Lee et al. 2006, from memory)', () => {
    const sim = simulateArgonSequence({ seed: 7, beta: 0.45, blank40A: 5e-14, items: layout.map(l => ({ ...l })), evolution: { kind: 'ingrowth', current40APerS: 2e-15 } })
    const out = processRatioSequence(bracketing, sim.items, [ATMOSPHERIC_ARGON])
    expect(out.steps.map(s => s.step)).toEqual(['time-zero', 'blank', 'mass-bias'])
    expect(out.steps.every(s => s.source.length > 10)).toBe(true)
    const monitor = out.items.find(i => i.role === 'monitoring-standard')!
    for (const q of ['40Ar/36Ar', '38Ar/36Ar']) {
      const f = monitor.final[q]!
      expect(Math.abs(f.value - air[q]!.value)).toBeLessThan(2 * f.u)
      expect(monitor.residual![q]).toBeCloseTo(f.value - air[q]!.value, 12)
      // The raw ratio is off by the instrument's fractionation, beyond the corrected value's 2u.
      expect(Math.abs(monitor.raw[q]!.value - air[q]!.value)).toBeGreaterThan(2 * f.u)
    }
    expect(monitor.final['40Ar/36Ar']!.scale).toMatch(/mass-bias corrected \(exponential law\)/)
    expect(out.accepted).toBe(true)
  })

  it('runs the blank before the time-zero step when the method says so: taken off every cycle, its u joined to the intercept', () => {
    const sim = simulateArgonSequence({ seed: 13, beta: 0.5, blank40A: 3e-13, items: layout.map(l => ({ ...l })) })
    const blankFirst: MethodDefinition = { ...bracketing, steps: [{ step: 'blank' }, { step: 'time-zero', model: 'linear' }, bracketing.steps[2]!] }
    const out = processRatioSequence(blankFirst, sim.items, [ATMOSPHERIC_ARGON])
    expect(out.steps[0]!.parameters.appliedTo).toMatch(/^cycles \(each blank regressed to t = 0/)
    const afterwards = processRatioSequence(bracketing, sim.items, [ATMOSPHERIC_ARGON])
    expect(afterwards.steps[1]!.parameters.appliedTo).toBe('beams')
    const monitor = out.items.find(i => i.role === 'monitoring-standard')!
    for (const q of ['40Ar/36Ar', '38Ar/36Ar']) expect(Math.abs(monitor.residual![q]!)).toBeLessThan(2 * monitor.final[q]!.u)
    // Both orders take the blanks' intercepts; with the linear model a constant taken off every cycle
    // comes off the intercept unchanged, so both orders give the same value and u.
    const other = afterwards.items.find(i => i.role === 'monitoring-standard')!
    expect(monitor.final['40Ar/36Ar']!.value).toBeCloseTo(other.final['40Ar/36Ar']!.value, 9)
    expect(monitor.final['40Ar/36Ar']!.u).toBeCloseTo(other.final['40Ar/36Ar']!.u, 9)
  })

  it('flags the sequence as not accepted when a standard is off by more than the method allows', () => {
    const sim = simulateArgonSequence({ seed: 8, beta: 0.3, items: layout.map(l => ({ ...l })) })
    const monitor = sim.items[4]!
    monitor.ratios['40/36'] = { value: monitor.ratios['40/36']!.value * 1.05, u: monitor.ratios['40/36']!.u }
    const out = processRatioSequence({ ...bracketing, steps: [bracketing.steps[2]!] }, sim.items.filter(i => i.role !== 'blank'), [ATMOSPHERIC_ARGON])
    expect(out.accepted).toBe(false)
    expect(out.flags.map(f => [f.code, f.position])).toContainEqual(['standard-residual-exceeds', 5])
  })

  it.each([
    ['no air standard', { items: (i: { role: string }) => i.role !== 'working-standard', method: bracketing }, 'no-standard-in-sequence'],
    ['a δ-only step', { items: () => true, method: { ...bracketing, steps: [{ step: 'oxygen-17', parameters: 'brand-2010' }] } }, 'step-not-applicable'],
    ['no blank acquisition', { items: (i: { role: string }) => i.role !== 'blank', method: bracketing }, 'no-blank'],
    ['a beam step after the mass-bias step', { items: () => true, method: { ...bracketing, steps: [bracketing.steps[2]!, bracketing.steps[1]!] } }, 'step-order'],
    ['a δ gas', { items: () => true, method: { ...bracketing, gas: 'CO2' } }, 'gas-not-supported'],
  ] as const)('refuses to run with %s (EngineError)', (_name, c, code) => {
    const sim = simulateArgonSequence({ seed: 9, items: layout.map(l => ({ ...l })) })
    let error: unknown
    try { processRatioSequence(c.method as MethodDefinition, sim.items.filter(c.items), [ATMOSPHERIC_ARGON]) }
    catch (e) { error = e }
    expect(error).toBeInstanceOf(EngineError)
    expect((error as EngineError).code).toBe(code)
  })

  it('checks each air standard against the others (leave one out); a lone standard comes back exact', () => {
    const sim = simulateArgonSequence({ seed: 12, beta: 0.4, items: layout.map(l => ({ ...l })) })
    const shot = sim.items[3]!
    shot.ratios['40/36'] = { value: shot.ratios['40/36']!.value * 1.004, u: shot.ratios['40/36']!.u }
    const method: MethodDefinition = { ...bracketing, steps: [bracketing.steps[2]!], acceptance: { minAnchors: 2, maxStandardResidual: 2 } }
    const out = processRatioSequence(method, sim.items.filter(i => i.role !== 'blank'), [ATMOSPHERIC_ARGON])
    // The air shot made 4 ‰ high reads about 4 ‰ off the value its neighbours predict, and is flagged.
    const flagged = out.items.find(i => i.position === 4)!
    expect(flagged.residual!['40Ar/36Ar']! / 298.56 * 1000).toBeGreaterThan(2)
    expect(flagged.flags.map(f => f.code)).toContain('standard-residual-exceeds')
    expect(out.accepted).toBe(false)
    const lone = processRatioSequence(method, sim.items.filter(i => i.position <= 3 && i.role !== 'blank'), [ATMOSPHERIC_ARGON])
    expect(lone.items[0]!.final['40Ar/36Ar']!.value).toBeCloseTo(298.56, 9)
  })

  it('keeps an acquisition whose ratio is not positive, flagged and without a corrected value', () => {
    const sim = simulateArgonSequence({ seed: 11, items: layout.map(l => ({ ...l })) })
    sim.items[2]!.ratios['38/36'] = { value: -0.002, u: 0.004 }
    const out = processRatioSequence({ ...bracketing, steps: [bracketing.steps[2]!] }, sim.items, [ATMOSPHERIC_ARGON])
    const sample = out.items.find(i => i.position === 3)!
    expect(sample.final).toEqual({})
    expect(sample.flags.map(f => f.code)).toEqual(['ratio-not-positive'])
    expect(out.items).toHaveLength(sim.items.length)
    expect(Object.keys(out.items.find(i => i.position === 5)!.final)).toEqual(['40Ar/36Ar', '38Ar/36Ar'])
  })

  it('takes a ratio the acquisition did not state from its beams, and refuses when it has neither', () => {
    const sim = simulateArgonSequence({ seed: 14, beta: 0.4, items: layout.map(l => ({ ...l })) })
    const method: MethodDefinition = { ...bracketing, steps: [bracketing.steps[2]!] }
    const full = processRatioSequence(method, sim.items, [ATMOSPHERIC_ARGON])
    delete sim.items[2]!.ratios['38/36']
    const fromBeams = processRatioSequence(method, sim.items, [ATMOSPHERIC_ARGON])
    const a = full.items[2]!.final['38Ar/36Ar']!
    const b = fromBeams.items[2]!.final['38Ar/36Ar']!
    // The ratio of cycle means against the mean of cycle ratios: the same to well within u.
    expect(Math.abs(a.value - b.value)).toBeLessThan(0.1 * a.u)
    delete sim.items[2]!.beams['38']
    expect(() => processRatioSequence(method, sim.items, [ATMOSPHERIC_ARGON])).toThrow(/items\[2\]\.ratios\.38\/36/)
  })

  it('leaves the shared-denominator covariance out when a stated ratio is sharper than its denominator beam (static cycles)', () => {
    // 36 beam ±1 % (a common beam fluctuation), ratios ±0.1 ‰ (it cancels in them): the covariance is unknown,
    // and leaving it out overstates u, so u is the no-covariance formula of massBias.ts.
    const item = {
      position: 1, role: 'sample' as const, acquiredAt: 0,
      beams: { 36: { value: 1e-13, u: 1e-15 }, 38: { value: 1.9e-14, u: 1.9e-16 }, 40: { value: 3e-11, u: 3e-13 } },
      ratios: { '40/36': { value: 300, u: 0.03 }, '38/36': { value: 0.19, u: 0.000019 } },
    }
    const method: MethodDefinition = { gas: 'Ar', steps: [{ step: 'mass-bias', law: 'exponential', against: 'internal', material: 'AIR-Ar', ratio: '38/36' }], acceptance: { minAnchors: 2 } }
    const out = processRatioSequence(method, [item], [ATMOSPHERIC_ARGON])
    const expected = correctRatio({ law: 'exponential', measured: item.ratios['40/36'], target: r4036, referenceMeasured: item.ratios['38/36'], referenceKnown: air['38Ar/36Ar']!, ref: r3836 })
    expect(out.items[0]!.final['40Ar/36Ar']!.u).toBeCloseTo(expected.u, 12)
    expect(out.items[0]!.final['40Ar/36Ar']!.value).toBeCloseTo(expected.value, 9)
  })

  it('refuses a time-zero step when an acquisition has no cycles, naming it', () => {
    const sim = simulateArgonSequence({ seed: 10, items: layout.map(l => ({ ...l })) })
    delete sim.items[2]!.cycles
    expect(() => processRatioSequence(bracketing, sim.items, [ATMOSPHERIC_ARGON])).toThrow(/items\[2\]\.cycles/)
  })
})
