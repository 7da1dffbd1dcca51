// Statistics shared by the noble-gas uncertainty tests (not a test file itself).
//
// Bias: |mean error| < 3·sd(error)/√N, the mean's own standard error times 3 (a 0.3 % false-alarm
// rate under normality; common practice, no source), so that with N = 300 a bias of about 0.17 sd
// is caught (a ½·u rule let 0.45 u through).
// Calibration of u: the mean of z² = (error/u)² against its expectation. With u from ν degrees of
// freedom, z is Student-t and E[z²] = ν/(ν − 2), Var[z²] = 2ν²(ν − 1)/((ν − 2)²(ν − 4)) (ν > 4); with
// u of known σ, N·mean z² is χ²_N (mean 1, variance 2/N). Limits: the χ²_N/N lower limit for ν = ∞
// and the t² upper limit for the smallest ν of the scenario, each at 3.29 of its standard deviation
// (two-sided 0.1 %, normal approximation to the χ² and to the mean of t², N ≥ 300; common practice).
// A u too large by 15 % gives mean z² ≈ 0.76 and a u too small by 15 %, 1.38: both are caught.

import { expect } from 'vitest'
import { coverageOfTwoU } from '../../shared/engine/isotopes/timeZero'
import { seededNormal } from '../../shared/engine/random'
import { ATMOSPHERIC_ARGON, type MassBiasLaw } from '../../shared/engine/isotopes/massBias'
import { processRatioSequence } from '../../shared/engine/isotopes/ratioSequence'
import { simulateArgonSequence, type ArgonTruth } from '../../shared/engine/isotopes/simulateNobleGas'
import type { MaterialValues } from '../../shared/engine/isotopes/types'
import type { MethodDefinition } from '../../shared/schemas/methods'

export const binomialBand = (pLow: number, pHigh: number, n: number): [number, number] => [
  pLow - 2.576 * Math.sqrt(pLow * (1 - pLow) / n), pHigh + 2.576 * Math.sqrt(pHigh * (1 - pHigh) / n),
]

/** [lower, upper] limits of mean z² over n draws, for u from at least `minDof` degrees of freedom. */
export function zSquareLimits(n: number, minDof: number): [number, number] {
  const lower = 1 - 3.29 * Math.sqrt(2 / n)
  if (!Number.isFinite(minDof)) return [lower, 1 + 3.29 * Math.sqrt(2 / n)]
  if (!(minDof > 4)) throw new Error('mean z² has no finite variance for ν ≤ 4')
  const mean = minDof / (minDof - 2)
  const variance = 2 * minDof * minDof * (minDof - 1) / ((minDof - 2) ** 2 * (minDof - 4))
  return [lower, mean + 3.29 * Math.sqrt(variance / n)]
}

export interface ErrorStats {
  n: number
  meanError: number
  sdError: number
  /** 3·sd(error)/√N: the largest |mean error| the bias rule accepts. */
  biasLimit: number
  meanU: number
  meanZ2: number
  within2u: number
  withinKu: number
  meanK: number
}

export function errorStats(errors: number[], us: number[], ks: number[] = us.map(() => 2)): ErrorStats {
  const n = errors.length
  const mean = (a: number[]) => a.reduce((s, v) => s + v, 0) / a.length
  const meanError = mean(errors)
  const sdError = Math.sqrt(errors.reduce((s, e) => s + (e - meanError) ** 2, 0) / (n - 1))
  const within = (k: (i: number) => number) => errors.filter((e, i) => Math.abs(e) <= k(i) * us[i]!).length / n
  return {
    n, meanError, sdError, biasLimit: 3 * sdError / Math.sqrt(n), meanU: mean(us),
    meanZ2: mean(errors.map((e, i) => (e / us[i]!) ** 2)), within2u: within(() => 2), withinKu: within(i => ks[i]!), meanK: mean(ks),
  }
}

// Argon sequences [blank, air standard, sample, air standard, blank] simulated over N seeds, the
// sample's corrected ratios against the truth. The accepted values' own uncertainties are honest
// parts of the stated u, so each seed draws the "true" atmosphere from N(298.56, 0.31) and
// N(0.1885, 0.0003) (Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507, from memory) and the
// engine is told the published values.
export const SEQUENCES = 300
export const SAMPLE: ArgonTruth = { '40/36': 612.4, '38/36': 0.1878 }
const airQ = ATMOSPHERIC_ARGON.values
const drawAir = (seed: number): ArgonTruth => {
  const g = seededNormal(seed * 7 + 3)
  return { '40/36': airQ['40Ar/36Ar']!.value + airQ['40Ar/36Ar']!.u * g(), '38/36': airQ['38Ar/36Ar']!.value + airQ['38Ar/36Ar']!.u * g() }
}

export interface Scenario {
  /** Range of the law's parameter over the seeds (exponential β, or power/linear fractionation per u). */
  beta?: [number, number]
  resistor36?: number
  material?: MaterialValues
  withoutBlank?: boolean
  /** The law the simulated source follows; the engine's law when omitted. */
  simLaw?: MassBiasLaw
  betaDriftPerHour?: number
}

/** Statistics of the sample's corrected ratios, per quantity, over SEQUENCES seeds. */
export function runSequences(against: 'standard' | 'internal', law: MassBiasLaw, scenario: Scenario = {}): Record<string, ErrorStats> {
  const beta = scenario.beta ?? [0.3, 0.7]
  const material = scenario.material ?? ATMOSPHERIC_ARGON
  const method: MethodDefinition = {
    gas: 'Ar',
    steps: [
      { step: 'time-zero', model: 'exponential' },
      ...(scenario.withoutBlank ? [] : [{ step: 'blank' } as const]),
      against === 'standard'
        ? { step: 'mass-bias', law, against, material: 'AIR-Ar', ratio: '40/36' }
        : { step: 'mass-bias', law, against, material: 'AIR-Ar', ratio: '38/36' },
    ],
    acceptance: { minAnchors: 2 },
  }
  const quantities = [['40Ar/36Ar', '40/36'], ['38Ar/36Ar', '38/36']] as const
  const acc = Object.fromEntries(quantities.map(([q]) => [q, { errors: [] as number[], us: [] as number[], ks: [] as number[] }]))
  for (let seed = 1; seed <= SEQUENCES; seed++) {
    const air = scenario.material ? { '40/36': 298.56, '38/36': 0.1885 } : drawAir(seed)
    // Internal normalisation assumes the sample's 38/36 is atmospheric: its truth is drawn from air's.
    const truth = against === 'internal' ? { '40/36': SAMPLE['40/36'], '38/36': air['38/36'] } : SAMPLE
    const std = { role: 'working-standard', material: 'AIR-Ar', current40A: 3e-10 } as const
    const sim = simulateArgonSequence({
      seed, air, beta: beta[0] + (beta[1] - beta[0]) * ((seed * 0.618034) % 1), blank40A: scenario.withoutBlank ? 0 : 2e-13,
      law: scenario.simLaw ?? law, betaDriftPerHour: scenario.betaDriftPerHour ?? 0,
      ...(scenario.resistor36 ? { resistorOhm: { 36: scenario.resistor36 } } : {}),
      evolution: { kind: 'consumption', ratePerS: 3e-4 },
      items: [{ role: 'blank' }, std, { role: 'sample', truth, current40A: 3e-10 }, std, { role: 'blank' }],
    })
    const sample = processRatioSequence(method, sim.items, [material]).items[2]!
    for (const [q, key] of quantities) {
      const f = sample.final[q]
      if (!f) continue
      acc[q]!.errors.push(f.value - truth[key])
      acc[q]!.us.push(f.u)
      acc[q]!.ks.push(f.k)
    }
  }
  return Object.fromEntries(Object.entries(acc).filter(([, a]) => a.errors.length > 0).map(([q, a]) => [q, errorStats(a.errors, a.us, a.ks)]))
}

export const SEQ_BAND = binomialBand(coverageOfTwoU(13), 0.9545, SEQUENCES)
// k is t_p(ν_eff) at p = 95.45 % (the level of k = 2), as for the δ systems.
export const K_BAND = binomialBand(0.9545, 0.9545, SEQUENCES)
// The smallest ν among the components is the time-zero fits' 13 (the blanks' prediction u is conservative).
export const Z2 = zSquareLimits(SEQUENCES, 13)

/** Every criterion (bias, mean z², ±2u, k·u) on one quantity's statistics over SEQUENCES seeds. */
export function expectCalibrated(s: ErrorStats, z2: [number, number] = Z2, twoU: [number, number] = SEQ_BAND) {
  expect(Math.abs(s.meanError)).toBeLessThan(s.biasLimit)
  expect(s.meanZ2).toBeGreaterThanOrEqual(z2[0])
  expect(s.meanZ2).toBeLessThanOrEqual(z2[1])
  expect(s.within2u).toBeGreaterThanOrEqual(twoU[0])
  expect(s.within2u).toBeLessThanOrEqual(twoU[1])
  expect(s.withinKu).toBeGreaterThanOrEqual(K_BAND[0])
  expect(s.withinKu).toBeLessThanOrEqual(K_BAND[1])
}
