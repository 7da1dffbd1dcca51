import { EngineError } from '../errors'

// Control charts of a reference material measured over time against its accepted value.
//
// Multi-rules of Westgard, Barry, Hunt & Groth, Clin. Chem. 27 (1981) 493, on z = (x − accepted)/s:
//   1-3s  one point beyond ±3s;
//   2-2s  two consecutive points beyond 2s on the same side;
//   R-4s  within one run, one control level beyond +2s and another beyond −2s (a range over 4s);
//   4-1s  four consecutive points beyond 1s on the same side;
//   10x   ten consecutive points on the same side of the accepted value.
// The paper defines R-4s within a run, across two control materials (levels). A chart here holds one
// material, one point a run, so the within-run rule cannot be evaluated; what this chart checks instead
// is a lab variant, "R-4s across runs": two consecutive runs' points on opposite sides beyond 2s
// (common practice of some labs, no source). It keeps the rule id 'R-4s' (stored with chart points),
// and every violation of it says `variant: 'across-runs'` and names itself so in its message. Every
// window that completes a rule is a violation, reported at its last point with all the points involved.
//
// Tabular CUSUM for slow drift (Page, Biometrika 41 (1954) 100), in the form and with the design
// values of Montgomery, Introduction to Statistical Quality Control, 6th ed., Wiley 2009, §9.1
// (from memory): C⁺_i = max(0, z_i − k + C⁺_{i−1}), C⁻_i = max(0, −z_i − k + C⁻_{i−1}), signal when
// either exceeds h; k = 0.5 (half the 1σ shift to detect), h = 5 (ARL₀ ≈ 465; h = 4 gives ≈ 168);
// both sums restart from zero after a signal. Its state is returned so a chart continues as
// points arrive.

export type WestgardRule = '1-3s' | '2-2s' | 'R-4s' | '4-1s' | '10x'
export const WESTGARD_RULES: readonly WestgardRule[] = ['1-3s', '2-2s', 'R-4s', '4-1s', '10x']
export const WESTGARD_SOURCE = 'Westgard, Barry, Hunt & Groth, Clin. Chem. 27 (1981) 493'
/** How this chart evaluates R-4s, against the 1981 definition. */
export const R4S_ACROSS_RUNS = {
  name: 'R-4s across runs',
  definition: 'two consecutive runs of one material on opposite sides beyond 2s (a lab variant: a single-material chart has one point a run)',
  original: 'Westgard et al., Clin. Chem. 27 (1981) 493: R-4s within one run, one control level beyond +2s and another beyond −2s',
} as const
export const CUSUM_SOURCE = 'tabular CUSUM: Page, Biometrika 41 (1954) 100; k and h per Montgomery, Introduction to Statistical Quality Control, 6th ed. (2009), §9.1 (from memory)'

export interface ControlPoint { at: number, value: number }

export interface RuleViolation {
  rule: WestgardRule
  /** 'across-runs' for R-4s: the lab variant this chart evaluates, not the 1981 within-run rule. */
  variant?: 'across-runs'
  /** Indices of the points involved, in order; the last one completed the rule. */
  points: number[]
  at: number[]
  message: string
}

export interface ChartTarget {
  /** The material's accepted value. */
  accepted: number
  /** The standard deviation the chart is drawn with (the lab's long-term s for this material). */
  sd: number
}

function zScores(points: readonly ControlPoint[], target: ChartTarget): number[] {
  if (!(target.sd > 0) || !Number.isFinite(target.sd)) throw new EngineError('sd', 'not-positive', 'the chart needs a positive standard deviation')
  if (!Number.isFinite(target.accepted)) throw new EngineError('accepted', 'not-finite', 'the accepted value must be a finite number')
  return points.map((p, i) => {
    if (!Number.isFinite(p.value)) throw new EngineError(`points[${i}].value`, 'not-finite', 'must be a finite number')
    return (p.value - target.accepted) / target.sd
  })
}

const range = (end: number, length: number) => Array.from({ length }, (_, j) => end - length + 1 + j)

/** Every Westgard violation in the series (points in time order), rule by rule. */
export function evaluateControlRules(points: readonly ControlPoint[], target: ChartTarget, rules: readonly WestgardRule[] = WESTGARD_RULES): RuleViolation[] {
  const z = zScores(points, target)
  const out: RuleViolation[] = []
  const add = (rule: WestgardRule, idx: number[], message: string, variant?: 'across-runs') => {
    out.push({ rule, ...(variant ? { variant } : {}), points: idx, at: idx.map(i => points[i]!.at), message })
  }
  const sameSide = (end: number, n: number, limit: number) => {
    if (end + 1 < n) return 0
    const w = range(end, n).map(i => z[i]!)
    if (w.every(v => v > limit)) return 1
    if (w.every(v => v < -limit)) return -1
    return 0
  }
  for (let i = 0; i < z.length; i++) {
    if (rules.includes('1-3s') && Math.abs(z[i]!) > 3) add('1-3s', [i], `one point ${z[i]! > 0 ? 'above +3s' : 'below −3s'}`)
    if (rules.includes('2-2s')) {
      const side = sameSide(i, 2, 2)
      if (side) add('2-2s', range(i, 2), `two consecutive points ${side > 0 ? 'above +2s' : 'below −2s'}`)
    }
    if (rules.includes('R-4s') && i >= 1) {
      const a = z[i - 1]!
      const b = z[i]!
      if ((a > 2 && b < -2) || (a < -2 && b > 2)) add('R-4s', [i - 1, i], `${R4S_ACROSS_RUNS.name}: two consecutive runs on opposite sides beyond 2s (range over 4s)`, 'across-runs')
    }
    if (rules.includes('4-1s')) {
      const side = sameSide(i, 4, 1)
      if (side) add('4-1s', range(i, 4), `four consecutive points ${side > 0 ? 'above +1s' : 'below −1s'}`)
    }
    if (rules.includes('10x')) {
      const side = sameSide(i, 10, 0)
      if (side) add('10x', range(i, 10), `ten consecutive points ${side > 0 ? 'above' : 'below'} the accepted value`)
    }
  }
  return out
}

export interface CusumState {
  /** C⁺ and C⁻ in units of s. */
  upper: number
  lower: number
  /** Points since each sum last stood at zero: where a signalled shift began. */
  upperRun: number
  lowerRun: number
  /** Points taken in so far. */
  count: number
}

export interface CusumOptions extends ChartTarget {
  /** Reference value in units of s; default 0.5. */
  k?: number
  /** Decision interval in units of s; default 5. */
  h?: number
}

export interface CusumSignal {
  side: 'upper' | 'lower'
  /** 'cusum-upper' or 'cusum-lower', as a chart point records its violations. */
  rule: 'cusum-upper' | 'cusum-lower'
  /** Index (in the points passed) and time of the signalling point. */
  point: number
  at: number
  value: number
  /** Points since the sum last stood at zero (the shift's likely start, Montgomery §9.1.3). */
  run: number
}

export const CUSUM_DEFAULTS = { k: 0.5, h: 5 } as const
export const initialCusumState = (): CusumState => ({ upper: 0, lower: 0, upperRun: 0, lowerRun: 0, count: 0 })

/** Runs the tabular CUSUM over `points`, continuing from `state` (a fresh chart when omitted). */
export function runCusum(points: readonly ControlPoint[], options: CusumOptions, state: CusumState = initialCusumState()) {
  const z = zScores(points, options)
  const k = options.k ?? CUSUM_DEFAULTS.k
  const h = options.h ?? CUSUM_DEFAULTS.h
  if (!(k >= 0) || !(h > 0)) throw new EngineError(k >= 0 ? 'h' : 'k', 'out-of-range', 'k must be ≥ 0 and h > 0')
  const s = { ...state }
  const signals: CusumSignal[] = []
  const trace: { at: number, upper: number, lower: number }[] = []
  z.forEach((zi, i) => {
    s.upper = Math.max(0, zi - k + s.upper)
    s.lower = Math.max(0, -zi - k + s.lower)
    s.upperRun = s.upper > 0 ? s.upperRun + 1 : 0
    s.lowerRun = s.lower > 0 ? s.lowerRun + 1 : 0
    s.count++
    trace.push({ at: points[i]!.at, upper: s.upper, lower: s.lower })
    if (s.upper > h || s.lower > h) {
      const side = s.upper > h ? 'upper' : 'lower'
      signals.push({ side, rule: `cusum-${side}`, point: i, at: points[i]!.at, value: side === 'upper' ? s.upper : s.lower, run: side === 'upper' ? s.upperRun : s.lowerRun })
      s.upper = 0; s.lower = 0; s.upperRun = 0; s.lowerRun = 0
    }
  })
  return { state: s, signals, trace }
}

/**
 * Points added to a chart: the Westgard violations they complete (a rule may reach back into the
 * history) and the CUSUM continued from its stored state, with the rules each new point broke, in
 * the order of `added` (what a chart point records as its violations).
 */
export function checkNewPoints(history: readonly ControlPoint[], added: readonly ControlPoint[], options: CusumOptions, cusumState?: CusumState) {
  const all = [...history, ...added]
  const violations = evaluateControlRules(all, options).filter(v => v.points.at(-1)! >= history.length)
  const cusum = runCusum(added, options, cusumState)
  const perPoint: string[][] = added.map(() => [])
  for (const v of violations) perPoint[v.points.at(-1)! - history.length]!.push(v.rule)
  for (const s of cusum.signals) perPoint[s.point]!.push(s.rule)
  return { violations, cusum, perPoint }
}
