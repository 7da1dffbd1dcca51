// The procedural blank's place and uncertainty, on argon sequences simulated from first principles
// (simulateNobleGas.ts) with the truth known, 300 seeds a case.
//  - Blank before time zero with memory ingrowth: the blank taken off every sample cycle must be the
//    blank's value at the inlet, not its mean over its cycles (which carries g·t̄ of ingrowth; the
//    sample's own ingrowth is then fitted and extrapolated away by the time-zero regression).
//  - A blank that varies from run to run: the blank in a sample's run is a new draw, so its u is a
//    prediction, max(s, rms u_i)·√(1 + 1/n) (Draper & Smith, Applied Regression Analysis, 3rd ed.,
//    Wiley 1998, ch. 1, prediction of a new observation), with n − 1 degrees of freedom when the
//    scatter s sets it.
// Bias rule and z² limits: noble-gas-stats-helpers.ts.
import { describe, expect, it } from 'vitest'
import { EngineError } from '../../shared/engine/errors'
import { ATMOSPHERIC_ARGON } from '../../shared/engine/isotopes/massBias'
import { processRatioSequence } from '../../shared/engine/isotopes/ratioSequence'
import { simulateArgonSequence, type ArgonSequenceSimulation } from '../../shared/engine/isotopes/simulateNobleGas'
import type { MaterialValues } from '../../shared/engine/isotopes/types'
import type { MethodDefinition, MethodStep } from '../../shared/schemas/methods'
import { coverageOfTwoU } from '../../shared/engine/isotopes/timeZero'
import { binomialBand, errorStats, zSquareLimits } from './noble-gas-stats-helpers'

const N = 300
// Air taken as exactly known so that the blank's and the beams' terms make the u.
const EXACT_AIR: MaterialValues = { ...ATMOSPHERIC_ARGON, values: { '40Ar/36Ar': { value: 298.56, u: 0 }, '38Ar/36Ar': { value: 0.1885, u: 0 } } }
const MASS_BIAS: MethodStep = { step: 'mass-bias', law: 'exponential', against: 'standard', material: 'AIR-Ar', ratio: '40/36' }
const TRUTH = { '40/36': 612.4, '38/36': 0.1878 }
const STD = { role: 'working-standard', material: 'AIR-Ar', current40A: 3e-10 } as const

function run(steps: MethodStep[], sim: Omit<ArgonSequenceSimulation, 'seed' | 'items'>, blanksEachEnd = 1) {
  const method: MethodDefinition = { gas: 'Ar', steps, acceptance: { minAnchors: 2 } }
  const errors: number[] = []
  const us: number[] = []
  const ks: number[] = []
  const blank = { role: 'blank' } as const
  for (let seed = 1; seed <= N; seed++) {
    const blanks = Array.from({ length: blanksEachEnd }, () => blank)
    const items = [...blanks, STD, { role: 'sample', truth: TRUTH, current40A: 1e-11 } as const, STD, ...blanks]
    const out = simulateArgonSequence({ seed, beta: 0.3 + 0.4 * ((seed * 0.618034) % 1), ...sim, items })
    const f = processRatioSequence(method, out.items, [EXACT_AIR]).items.find(i => i.role === 'sample')!.final['40Ar/36Ar']!
    errors.push(f.value - TRUTH['40/36'])
    us.push(f.u)
    ks.push(f.k)
  }
  return errorStats(errors, us, ks)
}

describe('blank before time zero, with memory ingrowth', () => {
  const ingrowth = { blank40A: 2e-13, evolution: { kind: 'ingrowth', current40APerS: 2e-16 } } as const
  it.each([
    ['blank, then time zero', [{ step: 'blank' }, { step: 'time-zero', model: 'linear' }, MASS_BIAS]],
    ['time zero, then blank', [{ step: 'time-zero', model: 'linear' }, { step: 'blank' }, MASS_BIAS]],
  ] as [string, MethodStep[]][])('%s: the sample\'s 40/36 is unbiased (|mean| < 3·sd/√N)', (_, steps) => {
    const s = run(steps, ingrowth)
    console.info(`${steps.map(x => x.step).join(' → ')} with ingrowth:`, JSON.stringify(s))
    expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
  })

  it('refuses a blank without cycle readings before time zero, naming the blank\'s cycles', () => {
    const sim = simulateArgonSequence({ seed: 4, ...ingrowth, items: [{ role: 'blank' }, STD, { role: 'sample', truth: TRUTH }, STD] })
    delete sim.items[0]!.cycles
    const method: MethodDefinition = { gas: 'Ar', steps: [{ step: 'blank' }, { step: 'time-zero', model: 'linear' }, MASS_BIAS], acceptance: { minAnchors: 2 } }
    let error: unknown
    try { processRatioSequence(method, sim.items, [EXACT_AIR]) }
    catch (e) { error = e }
    expect(error).toBeInstanceOf(EngineError)
    expect((error as EngineError).code).toBe('missing-cycles')
    expect((error as EngineError).field).toBe('items[0].cycles')
  })
})

describe('a blank that varies from run to run (30 %, each beam on its own), six blanks', () => {
  // The blank's 36 (about 4 % of the sample's) then dominates the sample's u; its prediction u rests
  // on ν = 5, so z is close to Student-t with 5 degrees of freedom: ±2u covers at P(|t₅| ≤ 2) = 0.898,
  // E[z²] = 5/3, and k = t₉₅(ν_eff) should make k·u a 95 % interval. Each beam's blank varies on its
  // own here (a background at one m/z), as the engine subtracts blanks beam by beam without their covariance.
  it.each([
    ['blank, then time zero', [{ step: 'blank' }, { step: 'time-zero', model: 'linear' }, MASS_BIAS]],
    ['time zero, then blank', [{ step: 'time-zero', model: 'linear' }, { step: 'blank' }, MASS_BIAS]],
  ] as [string, MethodStep[]][])('%s: unbiased, mean z² within limits, k·u covers 95.45 %%', (_, steps) => {
    const s = run(steps, { blank40A: 2e-13, blankSpreadRel: 0.3, blankSpreadPerBeam: true }, 3)
    const z2 = zSquareLimits(N, 5)
    const twoU = binomialBand(coverageOfTwoU(5), 0.9545, N)
    const kU = binomialBand(0.9545, 0.9545, N)
    console.info(`${steps.map(x => x.step).join(' → ')}, blank varying 30 %:`, JSON.stringify(s), 'z²', z2, '2u', twoU, 'k·u', kU)
    expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
    expect(s.meanZ2).toBeGreaterThanOrEqual(z2[0])
    expect(s.meanZ2).toBeLessThanOrEqual(z2[1])
    expect(s.within2u).toBeGreaterThanOrEqual(twoU[0])
    expect(s.within2u).toBeLessThanOrEqual(twoU[1])
    expect(s.withinKu).toBeGreaterThanOrEqual(kU[0])
    expect(s.withinKu).toBeLessThanOrEqual(kU[1])
  })
})

describe('a blank of atmospheric composition whose amount varies (30 %), six blanks', () => {
  it('the beam-by-beam blank u errs on the safe side: the blank\'s beams move together and partly cancel in 40/36', () => {
    // The engine carries no covariance between the blank's beams, so u here is larger than the error's
    // scatter: k·u covers at least 95.45 % (and mean z² stays under 1).
    const s = run([{ step: 'time-zero', model: 'linear' }, { step: 'blank' }, MASS_BIAS], { blank40A: 2e-13, blankSpreadRel: 0.3 }, 3)
    console.info('atmospheric blank varying 30 %:', JSON.stringify(s))
    expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
    expect(s.withinKu).toBeGreaterThanOrEqual(binomialBand(0.9545, 0.9545, N)[0])
    expect(s.meanZ2).toBeLessThan(1)
  })
})
