// False-alarm rates of the control-chart rules on simulated in-control data (a reference material
// measured with normal scatter about its accepted value, seeded Box–Muller deviates).
//
// Westgard multi-rules (Westgard, Barry, Hunt & Groth, Clin. Chem. 27 (1981) 493): the chance that
// a window of in-control points completes a rule follows from the normal distribution, with
// Φ(−3) = 0.0013499, Φ(−2) = 0.0227501, Φ(−1) = 0.1586553 (Abramowitz & Stegun, Handbook of
// Mathematical Functions, 1964, table 26.1):
//   1-3s 2Φ(−3) = 0.0026998 (the paper's false rejection of about 0.003 for one control a run, from memory)
//   2-2s 2Φ(−2)² = 0.0010351   R-4s 2Φ(−2)² = 0.0010351   4-1s 2Φ(−1)⁴ = 0.0012672   10x 2·2⁻¹⁰ = 0.0019531
// Overlapping windows make the counts clump (a run of 12 points above the mean completes 10x three
// times), so the standard error comes from batch means (100 batches of 20,000 points; Law & Kelton,
// Simulation Modeling and Analysis, 3rd ed., McGraw-Hill 2000, §9.5.3), and the band is the
// expected rate ± 4 standard errors.
//
// Tabular CUSUM with k = 0.5: in-control average run lengths 168 (h = 4) and 465 (h = 5),
// Montgomery, Introduction to Statistical Quality Control, 6th ed., Wiley 2009, table 9.3 (from
// memory; Siegmund's approximation gives 169 and 469). Run lengths are close to geometric, so their
// standard deviation is about the ARL itself; band: ARL ± 4·ARL/√runs.
import { describe, expect, it } from 'vitest'
import { seededNormal } from '../../shared/engine/random'
import { evaluateControlRules, runCusum, WESTGARD_RULES, type ControlPoint, type WestgardRule } from '../../shared/engine/isotopes/controlCharts'

const target = { accepted: 10, sd: 0.2 }
const inControl = (seed: number, n: number): ControlPoint[] => {
  const g = seededNormal(seed)
  return Array.from({ length: n }, (_, i) => ({ at: i, value: target.accepted + target.sd * g() }))
}

const EXPECTED: Record<WestgardRule, number> = {
  '1-3s': 0.0026998,
  '2-2s': 0.0010351,
  'R-4s': 0.0010351,
  '4-1s': 0.0012672,
  '10x': 0.0019531,
}

describe('Westgard rules: false-alarm rates on 2,000,000 in-control points', () => {
  const batches = 100
  const size = 20_000
  const counts = Object.fromEntries(WESTGARD_RULES.map(r => [r, [] as number[]])) as Record<WestgardRule, number[]>
  for (let b = 0; b < batches; b++) {
    const violations = evaluateControlRules(inControl(1000 + b, size), target)
    // The first windows of a batch are incomplete; the rate counts windows that could complete.
    for (const rule of WESTGARD_RULES) counts[rule].push(violations.filter(v => v.rule === rule).length)
  }
  const windowLength: Record<WestgardRule, number> = { '1-3s': 1, '2-2s': 2, 'R-4s': 2, '4-1s': 4, '10x': 10 }
  it.each(WESTGARD_RULES.map(r => [r]))('%s fires at its normal-theory rate', (rule) => {
    const rates = counts[rule].map(c => c / (size - windowLength[rule] + 1))
    const mean = rates.reduce((s, v) => s + v, 0) / batches
    const se = Math.sqrt(rates.reduce((s, v) => s + (v - mean) ** 2, 0) / (batches - 1) / batches)
    console.info(`${rule}: rate ${mean.toFixed(6)} ± ${se.toFixed(6)} (expected ${EXPECTED[rule]})`)
    expect(Math.abs(mean - EXPECTED[rule])).toBeLessThan(4 * se)
    // And within 10 % of it (about 4 binomial standard errors for the rarest rule at 2·10⁶ points),
    // so that a noisy batch spread cannot widen the band unnoticed.
    expect(Math.abs(mean / EXPECTED[rule] - 1)).toBeLessThan(0.1)
  })
})

describe('tabular CUSUM: in-control average run length', () => {
  it.each([
    [4, 168, 2000],
    [5, 465, 800],
  ])('h = %d: ARL₀ close to %d (Montgomery 2009, table 9.3, from memory) over %d runs', (h, arl, runs) => {
    const lengths: number[] = []
    let state
    let last = -1
    for (let chunk = 0; lengths.length < runs; chunk++) {
      const points = inControl(50_000 + chunk, 20_000).map((p, i) => ({ ...p, at: chunk * 20_000 + i }))
      const result = runCusum(points, { ...target, k: 0.5, h }, state)
      for (const s of result.signals) { lengths.push(s.at - last); last = s.at }
      state = result.state
    }
    const used = lengths.slice(0, runs)
    const mean = used.reduce((s, v) => s + v, 0) / runs
    console.info(`CUSUM h = ${h}: ARL₀ ${mean.toFixed(1)} over ${runs} runs (expected ${arl} ± ${(4 * arl / Math.sqrt(runs)).toFixed(1)})`)
    expect(Math.abs(mean - arl)).toBeLessThan(4 * arl / Math.sqrt(runs))
  })
})
