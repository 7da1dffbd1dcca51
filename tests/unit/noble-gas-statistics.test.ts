// The noble-gas ratio engine's stated uncertainties, tested on argon sequences simulated from
// first principles with the truth known (shared/engine/isotopes/simulateNobleGas.ts: fractionation
// by a law with a random parameter per sequence, consumption or ingrowth with time since inlet,
// procedural blank, shot and Johnson–Nyquist noise). More cases: noble-gas-statistics-laws.test.ts
// (linear and power laws, β drifting), -stated (stated ratios), -blank (the blank).
//
// Criteria, per quantity over N seeds (noble-gas-stats-helpers.ts): |mean error| < 3·sd(error)/√N;
// mean z² = mean (error/u)² inside its χ² / t² limits; the fraction of seeds with |error| ≤ 2u inside a
// binomial 99 % band; k·u (k = t₉₅(ν_eff), GUM G.4.1) covering 95 % within its binomial band. The
// expected ±2u fraction is not one number: a component estimated from ν = n − 2 degrees of freedom (a
// 15-cycle time-zero fit, ν = 13) covers at P(|t₁₃| ≤ 2) = 0.933, a component of known σ at
// P(|Z| ≤ 2) = 0.954 (GUM G.3, G.4), and the combination lies between. Band: [0.933 − 2.576·√(0.933·0.067/N),
// 0.954 + 2.576·√(0.954·0.046/N)] (normal approximation to the binomial, common practice).
import { describe, expect, it } from 'vitest'
import { isotope } from '../../shared/engine/species'
import { ATMOSPHERIC_ARGON } from '../../shared/engine/isotopes/massBias'
import { simulateArgonSequence } from '../../shared/engine/isotopes/simulateNobleGas'
import { coverageOfTwoU, timeZeroIntercept, type TimeZeroModel } from '../../shared/engine/isotopes/timeZero'
import type { MaterialValues } from '../../shared/engine/isotopes/types'
import { binomialBand as band, errorStats, expectCalibrated, runSequences, SEQ_BAND, Z2, zSquareLimits } from './noble-gas-stats-helpers'

describe('argon sequences: bias and coverage over 300 simulated sequences', () => {
  it.each([
    ['standard', ['40Ar/36Ar', '38Ar/36Ar']],
    ['internal', ['40Ar/36Ar']],
  ] as const)('mass bias against %s (exponential law): unbiased, mean z² within its limits, ±2u and k·u cover within their bands', (against, quantities) => {
    const result = runSequences(against, 'exponential')
    console.info(`mass bias against ${against}:`, JSON.stringify(result), 'band', SEQ_BAND, 'z²', Z2)
    for (const q of quantities) expectCalibrated(result[q]!)
  })

  it('internal normalisation with the 36 beam on a noisy 10^10 Ω amplifier: the shared-denominator covariance carries the u', () => {
    // With 36Ar the noisiest beam, 40/36 and 38/36 move together; the covariance term −2e·u_rel²(36)
    // (massBias.ts) is what keeps the stated u honest. The reference ratio is taken as exactly known
    // (a gas of composition known by construction) and the line has no blank (the blank's prediction u,
    // blank.ts, is conservative for a blank that does not vary), so that measurement terms alone make the u.
    const exact: MaterialValues = { ...ATMOSPHERIC_ARGON, values: { '40Ar/36Ar': { value: 298.56, u: 0 }, '38Ar/36Ar': { value: 0.1885, u: 0 } } }
    const s = runSequences('internal', 'exponential', { resistor36: 1e10, material: exact, withoutBlank: true })['40Ar/36Ar']!
    console.info('internal, 36 on 1e10 Ω:', JSON.stringify(s), 'band', SEQ_BAND, 'z²', Z2)
    expectCalibrated(s)
  })

  it('the same statistic catches the power law used on data that follow the exponential law (negative control)', () => {
    // Internal normalisation on 38/36 extrapolates to 40/36, twice the mass difference: the laws part by
    // (Δm40/Δm38 − ln(m40/m36)/ln(m38/m36))·β·ln(m38/m36) = (2.00223 − 1.95085)·β·0.0539879 ≈ 3.3 ‰ at
    // β = 1.2 (a strongly discriminating source), against a stated u of about 3.7 ‰, most of it the
    // 38/36 of air's own uncertainty.
    const right = runSequences('internal', 'exponential', { beta: [1.0, 1.4] })['40Ar/36Ar']!
    const wrong = runSequences('internal', 'power', { beta: [1.0, 1.4], simLaw: 'exponential' })['40Ar/36Ar']!
    console.info('β 1.0–1.4, exponential law:', JSON.stringify(right), 'power law:', JSON.stringify(wrong))
    expect(Math.abs(right.meanError)).toBeLessThan(right.biasLimit)
    expect(Math.abs(wrong.meanError)).toBeGreaterThan(wrong.biasLimit)
  })
})

describe('time-zero intercept: bias and coverage over 400 simulated inlets × 3 beams', () => {
  // 10 cycles → ν = 8: ±2u covers at P(|t₈| ≤ 2) = 0.9195 (Student's t; GUM G.3.2).
  const cycles = 10
  const fits = 400 * 3
  const p = coverageOfTwoU(cycles - 2)
  const tzBand = band(p, p, fits)
  const m36 = isotope('36Ar').mass
  it.each([
    ['linear', { kind: 'ingrowth', current40APerS: 4e-15 }],
    ['exponential', { kind: 'consumption', ratePerS: 1.5e-3 }],
  ] as [TimeZeroModel, { kind: 'ingrowth', current40APerS: number } | { kind: 'consumption', ratePerS: number }][])('%s model on data that follow it', (model, evolution) => {
    const errors: number[] = []
    const us: number[] = []
    const ks: number[] = []
    for (let seed = 1; seed <= 400; seed++) {
      const beta = 0.4
      const sim = simulateArgonSequence({ seed, beta, cycles, evolution, items: [{ role: 'sample', truth: { '40/36': 298.56, '38/36': 0.1885 }, current40A: 1e-11 }] })
      const item = sim.items[0]!
      const truthAt0: Record<string, number> = { 40: 1e-11, 36: 1e-11 / 298.56, 38: 1e-11 / 298.56 * 0.1885 }
      for (const beam of ['36', '38', '40']) {
        const fit = timeZeroIntercept(item.cycles!.map(c => c.t), item.cycles!.map(c => c.beams[beam]!), model)
        const truth = truthAt0[beam]! * (isotope(`${beam}Ar`).mass / m36) ** -beta
        errors.push((fit.intercept.value - truth) / truth)
        us.push(fit.intercept.u / truth)
        ks.push(fit.k95)
      }
    }
    const s = errorStats(errors, us, ks)
    const k95Band = band(0.95, 0.95, fits)
    console.info(`time-zero ${model}:`, JSON.stringify(s), 'expected', p.toFixed(4), 'band', tzBand)
    expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
    // ν = 8: E[z²] = 8/6; the fit's u is the whole u, so the t² limits apply.
    const z2 = zSquareLimits(fits, cycles - 2)
    expect(s.meanZ2).toBeGreaterThanOrEqual(z2[0])
    expect(s.meanZ2).toBeLessThanOrEqual(z2[1])
    expect(s.within2u).toBeGreaterThanOrEqual(tzBand[0])
    expect(s.within2u).toBeLessThanOrEqual(tzBand[1])
    // k95 = t₉₅(8) = 2.306 makes U = k95·u the 95 % interval.
    expect(s.withinKu).toBeGreaterThanOrEqual(k95Band[0])
    expect(s.withinKu).toBeLessThanOrEqual(k95Band[1])
    expect(fits).toBe(errors.length)
  })
})
