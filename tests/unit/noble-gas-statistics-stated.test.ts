// Internal normalisation on the ratios an acquisition states (no beam-level step: the ratios are
// the means of the cycles' ratios, with their standard errors), in static vacuum where the gas is
// consumed while it is measured. The beams' means then scatter mostly with the signal's decay, not
// with noise, so the covariance of 40/36 and 38/36 must come from the cycles themselves (GUM, JCGM
// 100:2008, 5.2.3, eq. 17: s(q̄, r̄) = Σ(q_k − q̄)(r_k − r̄)/(n(n − 1)) over simultaneous pairs), not
// from the 36 beam's scatter. Simulated from first principles (simulateNobleGas.ts): 36 on a noisy
// 10^10 Ω amplifier, exponential-law fractionation, Knudsen consumption λ_i = λ·√(m40/m_i); the
// reference 38/36 taken as exactly known so that the measurement alone makes u. Each stated ratio's
// u has n − 1 = 14 degrees of freedom (15 cycles), so z = error/u is Student-t with ν = 14:
// ±2u covers at P(|t₁₄| ≤ 2) = 0.935, E[z²] = 14/12 (limits in noble-gas-stats-helpers.ts), and the
// stated k = t₉₅(14) makes k·u a 95 % interval.
// Consumption changes the ratios by Knudsen flow, not exactly by the exponential law; at λ ≤ 1e-3/s
// and the cycles' mean time of 85 s that leaves 40/36 off by under 0.07 ‰ (0.04 in 612), a small
// fraction of the bias limit.
import { describe, expect, it } from 'vitest'
import { ATMOSPHERIC_ARGON } from '../../shared/engine/isotopes/massBias'
import { processRatioSequence } from '../../shared/engine/isotopes/ratioSequence'
import { simulateArgonSequence } from '../../shared/engine/isotopes/simulateNobleGas'
import { coverageOfTwoU } from '../../shared/engine/isotopes/timeZero'
import type { MaterialValues } from '../../shared/engine/isotopes/types'
import type { MethodDefinition } from '../../shared/schemas/methods'
import { binomialBand, errorStats, K_BAND, zSquareLimits } from './noble-gas-stats-helpers'

const N = 300
const EXACT_AIR: MaterialValues = { ...ATMOSPHERIC_ARGON, values: { '40Ar/36Ar': { value: 298.56, u: 0 }, '38Ar/36Ar': { value: 0.1885, u: 0 } } }
const METHOD: MethodDefinition = { gas: 'Ar', steps: [{ step: 'mass-bias', law: 'exponential', against: 'internal', material: 'AIR-Ar', ratio: '38/36' }], acceptance: { minAnchors: 1 } }
const TRUTH = { '40/36': 612.4, '38/36': 0.1885 }

describe('internal normalisation on stated ratios with consumption (300 sequences each)', () => {
  it.each([[0], [3e-4], [1e-3]])('λ = %s /s: unbiased, mean z² and ±2u coverage as for ν = 14', (lambda) => {
    const errors: number[] = []
    const us: number[] = []
    const ks: number[] = []
    for (let seed = 1; seed <= N; seed++) {
      const sim = simulateArgonSequence({
        seed, beta: 0.3 + 0.4 * ((seed * 0.618034) % 1), resistorOhm: { 36: 1e10 },
        evolution: lambda > 0 ? { kind: 'consumption', ratePerS: lambda } : { kind: 'none' },
        items: [{ role: 'sample', truth: TRUTH, current40A: 3e-10 }],
      })
      const f = processRatioSequence(METHOD, sim.items, [EXACT_AIR]).items[0]!.final['40Ar/36Ar']!
      errors.push(f.value - TRUTH['40/36'])
      us.push(f.u)
      ks.push(f.k)
    }
    const s = errorStats(errors, us, ks)
    const z2 = zSquareLimits(N, 14)
    const cover = binomialBand(coverageOfTwoU(14), coverageOfTwoU(14), N)
    console.info(`stated ratios, λ = ${lambda}:`, JSON.stringify(s), 'z² limits', z2, 'coverage band', cover)
    expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
    expect(s.meanZ2).toBeGreaterThanOrEqual(z2[0])
    expect(s.meanZ2).toBeLessThanOrEqual(z2[1])
    expect(s.within2u).toBeGreaterThanOrEqual(cover[0])
    expect(s.within2u).toBeLessThanOrEqual(cover[1])
    // k = t_p(14) at p = 95.45 % (the level of k = 2 for a normal output) = 2.195 from the
    // cycles' n − 1 (GUM G.4.1; Table G.2 gives 2.18 at ν = 15) makes k·u the 95.45 % interval.
    expect(s.meanK).toBeCloseTo(2.195, 2)
    expect(s.withinKu).toBeGreaterThanOrEqual(K_BAND[0])
    expect(s.withinKu).toBeLessThanOrEqual(K_BAND[1])
  })

  it('records with the step that 38/36 internal normalisation does not hold for irradiated samples (38Ar from Cl)', () => {
    const sim = simulateArgonSequence({ seed: 1, beta: 0.4, items: [{ role: 'sample', truth: TRUTH }] })
    const out = processRatioSequence(METHOD, sim.items, [EXACT_AIR])
    const step = out.steps.find(st => st.step === 'mass-bias')!
    expect(step.parameters.methodNote).toMatch(/invalid for neutron-irradiated samples.*37Cl/)
    expect(step.parameters.covarianceBasis).toEqual(['cycles (GUM 5.2.3)'])
  })
})
