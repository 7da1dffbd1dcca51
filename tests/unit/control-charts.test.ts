// Control-chart rules on constructed series: each Westgard rule (Westgard, Barry, Hunt & Groth,
// Clin. Chem. 27 (1981) 493) fires on a series built to break it and stays silent on one just
// inside its limit; the tabular CUSUM (Page, Biometrika 41 (1954) 100; k = 0.5, h = 5 after
// Montgomery, Introduction to Statistical Quality Control, 6th ed., 2009, §9.1, from memory)
// signals a slow drift, carries its state across calls and restarts after a signal.
import { describe, expect, it } from 'vitest'
import { EngineError } from '../../shared/engine/errors'
import { checkNewPoints, evaluateControlRules, R4S_ACROSS_RUNS, runCusum, type ControlPoint, type WestgardRule } from '../../shared/engine/isotopes/controlCharts'

const target = { accepted: 298.56, sd: 0.5 }
/** Points at z-scores: value = accepted + z·sd, one a day. */
const series = (z: number[]): ControlPoint[] => z.map((v, i) => ({ at: Date.UTC(2026, 0, 1) + i * 86_400_000, value: target.accepted + v * target.sd }))
const fired = (z: number[], rule: WestgardRule) => evaluateControlRules(series(z), target, [rule])

describe('Westgard multi-rules (Westgard et al. 1981)', () => {
  it.each([
    ['1-3s', [0.2, -0.5, 3.05, 0.1], [2], [0.2, -0.5, 2.95, 0.1]],
    ['1-3s', [0.2, -3.2], [1], [0.2, -2.99]],
    ['2-2s', [0.3, 2.1, 2.2, 0], [1, 2], [0.3, 2.1, 1.95, 0]],
    ['2-2s', [-2.5, -2.05], [0, 1], [-2.5, 2.05]],
    ['R-4s', [0.1, 2.2, -2.1], [1, 2], [0.1, 2.2, -1.95]],
    ['4-1s', [0, 1.2, 1.1, 1.5, 1.05], [1, 2, 3, 4], [0, 1.2, 1.1, 1.5, 0.95]],
    ['4-1s', [-1.1, -1.2, -1.3, -1.4], [0, 1, 2, 3], [-1.1, -1.2, 0.5, -1.3, -1.4]],
    ['10x', [0.1, 0.2, 0.3, 0.1, 0.5, 0.2, 0.1, 0.4, 0.3, 0.05], [0, 1, 2, 3, 4, 5, 6, 7, 8, 9], [0.1, 0.2, 0.3, 0.1, 0.5, 0.2, 0.1, 0.4, 0.3, -0.05]],
  ] as [WestgardRule, number[], number[], number[]][])('%s fires on %j (points %j), not on %j', (rule, breaking, points, inside) => {
    const v = fired(breaking, rule)
    expect(v).toHaveLength(1)
    expect(v[0]!.rule).toBe(rule)
    expect(v[0]!.points).toEqual(points)
    expect(v[0]!.at).toEqual(points.map(i => series(breaking)[i]!.at))
    expect(fired(inside, rule)).toEqual([])
  })

  it('R-4s on a one-material chart is the across-runs lab variant, named so, not the 1981 within-run rule', () => {
    // Westgard et al. 1981 define R-4s within a run across two control levels; one point a run here.
    const [v] = fired([0.1, 2.2, -2.1], 'R-4s')
    expect(v!.variant).toBe('across-runs')
    expect(v!.message).toMatch(/^R-4s across runs: two consecutive runs/)
    expect(R4S_ACROSS_RUNS.original).toMatch(/1981.*within one run/)
    expect(fired([0.5, 3.4], '1-3s')[0]!.variant).toBeUndefined()
  })

  it('returns every violation of every rule in one series', () => {
    const z = [0.5, 3.4, 2.3, 2.4, -0.2, 1.1, 1.2, 1.3, 1.4, 0.2]
    const rules = evaluateControlRules(series(z), target).map(v => `${v.rule}@${v.points.at(-1)}`)
    expect(rules).toEqual(['1-3s@1', '2-2s@2', '2-2s@3', '4-1s@8'])
  })

  it('refuses a chart without a positive standard deviation or with a non-finite point', () => {
    expect(() => evaluateControlRules(series([0]), { accepted: 1, sd: 0 })).toThrow(EngineError)
    expect(() => evaluateControlRules([{ at: 0, value: Number.NaN }], target)).toThrow(/points\[0\]/)
  })
})

describe('tabular CUSUM (Page 1954; Montgomery 2009)', () => {
  it('signals a drift of 1 s after the sums pass h = 5, and names where it began', () => {
    // In control for 10 points, then +1s: C⁺ grows by z − k = 0.5 a point, passing 5 on the 11th point of the shift.
    const z = [...Array.from({ length: 10 }, () => 0), ...Array.from({ length: 14 }, () => 1)]
    const { signals } = runCusum(series(z), target)
    expect(signals).toHaveLength(1)
    expect(signals[0]!).toMatchObject({ side: 'upper', rule: 'cusum-upper', point: 20, run: 11 })
  })

  it('continues from its state exactly as one run over all points, and restarts after a signal', () => {
    const z = [0.4, 0.9, 1.3, -0.2, 1.8, 1.1, 0.7, 1.6, 1.2, 0.9, 1.4, 1.0, -1.5, -2.2, -1.9]
    const all = runCusum(series(z), target)
    const first = runCusum(series(z).slice(0, 7), target)
    const rest = runCusum(series(z).slice(7), target, first.state)
    expect(rest.state).toEqual(all.state)
    expect([...first.signals, ...rest.signals].map(s => s.at)).toEqual(all.signals.map(s => s.at))
    expect(all.signals.map(s => s.side)).toEqual(['upper'])
    expect(all.trace[all.signals[0]!.point]).toBeDefined()
    // Just inside: +0.9s for 10 points sums to 4.0 < 5, no signal.
    expect(runCusum(series(Array.from({ length: 10 }, () => 0.9)), target).signals).toEqual([])
  })
})

describe('checkNewPoints: a chart growing sequence by sequence', () => {
  it('reports the rules the new points complete with the history, and continues the CUSUM', () => {
    const history = series([0.2, -0.3, 2.4])
    const added = series([0.2, -0.3, 2.4, 2.6, 0.1]).slice(3)
    const first = checkNewPoints([], history, target)
    const next = checkNewPoints(history, added, target, first.cusum.state)
    // 2.4 (history) then 2.6 (new): 2-2s completed by the first new point, reaching back one point.
    expect(next.perPoint).toEqual([['2-2s'], []])
    expect(next.violations[0]!.points).toEqual([2, 3])
    expect(next.cusum.state.count).toBe(5)
  })
})
