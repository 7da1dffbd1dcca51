import { seededNormal } from './random'

// First-order propagation of uncertainty, GUM (JCGM 100:2008) section 5.1: for
// y = f(x1..xN) with uncorrelated inputs, u_c²(y) = Σ (∂f/∂xi)² u²(xi). The sensitivity
// coefficients are taken by central differences (GUM 5.1.3, note 2), so any model can be
// propagated; a Monte Carlo propagation (GUM Supplement 1, JCGM 101:2008) cross-checks it.

export interface Input { value: number, u: number }

export interface Propagated {
  value: number
  u: number
  /** Each input's share of u², in input order: (c_i u_i)². */
  contributions: number[]
}

export function propagate(model: (x: number[]) => number, inputs: Input[]): Propagated {
  const x = inputs.map(i => i.value)
  const value = model(x)
  const contributions = inputs.map((input, i) => {
    if (input.u === 0) return 0
    const h = input.u * 1e-3 || Math.abs(input.value) * 1e-8
    const up = [...x]
    const down = [...x]
    up[i] = x[i]! + h
    down[i] = x[i]! - h
    const sensitivity = (model(up) - model(down)) / (2 * h)
    return (sensitivity * input.u) ** 2
  })
  return { value, u: Math.sqrt(contributions.reduce((a, b) => a + b, 0)), contributions }
}

/** Monte Carlo propagation with normal inputs (GUM-S1 5.9, 6.4.7): mean and standard deviation of y. */
export function propagateMonteCarlo(model: (x: number[]) => number, inputs: Input[], trials = 200_000, seed = 20081): { mean: number, u: number } {
  const normal = seededNormal(seed)
  let mean = 0
  let m2 = 0
  const x = new Array<number>(inputs.length)
  for (let t = 1; t <= trials; t++) {
    for (let i = 0; i < inputs.length; i++) x[i] = inputs[i]!.value + inputs[i]!.u * normal()
    const y = model(x)
    // Welford's running variance.
    const d = y - mean
    mean += d / t
    m2 += d * (y - mean)
  }
  return { mean, u: Math.sqrt(m2 / (trials - 1)) }
}

/**
 * A coverage interval by GUM Supplement 1 (JCGM 101:2008): the model evaluated on M draws of
 * its normal inputs (5.9, 6.4.7), the M values sorted (7.5), and
 *  - the probabilistically symmetric 100p % interval [y_(r), y_(r+q)], q = pM rounded,
 *    r = (M − q)/2 (7.7.1), or
 *  - the shortest one, r minimising y_(r+q) − y_(r) (7.7.2).
 * The expanded uncertainty is the interval's half-width U = (y_high − y_low)/2 and k = U/u
 * (for a normal output k → 1.96 at p = 0.95; a skewed output shows in the asymmetry of the
 * interval about the mean, reported as it is).
 * Adaptive (7.9): runs of M = max(100/(1−p), 10⁴) trials until twice the standard deviation
 * of the runs' mean, u, y_low and y_high is within the numerical tolerance δ = ½·10^l of u
 * written with `digits` significant digits (7.9.2; default 2); all trials are then pooled.
 */
export interface CoverageResult {
  mean: number
  u: number
  trials: number
  p: number
  kind: 'probabilistically-symmetric' | 'shortest'
  interval: [number, number]
  expandedU: number
  k: number
  /** Adaptive runs only: whether the tolerance was met before `maxTrials`. */
  converged: boolean
}

export interface CoverageOptions {
  p?: number
  shortest?: boolean
  seed?: number
  /** A fixed number of trials; omitted, the adaptive procedure of JCGM 101 7.9 decides. */
  trials?: number
  digits?: number
  maxTrials?: number
}

function intervalOf(sorted: Float64Array, p: number, shortest: boolean): [number, number] {
  const M = sorted.length
  const q = Math.min(M, Math.max(1, Math.floor(p * M + 0.5)))
  if (!shortest) {
    const r = (M - q) % 2 === 0 ? (M - q) / 2 : (M - q + 1) / 2
    // 1-based y_(r)..y_(r+q) of 7.7.1, r ≥ 1
    const lo = Math.max(1, r)
    return [sorted[lo - 1]!, sorted[Math.min(M, lo + q) - 1]!]
  }
  let best = 1
  let width = Infinity
  for (let r = 1; r + q <= M; r++) {
    const w = sorted[r + q - 1]! - sorted[r - 1]!
    if (w < width) { width = w; best = r }
  }
  return [sorted[best - 1]!, sorted[best + q - 1]!]
}

function meanAndU(y: Float64Array): { mean: number, u: number } {
  let mean = 0
  let m2 = 0
  for (let t = 0; t < y.length; t++) {
    const d = y[t]! - mean
    mean += d / (t + 1)
    m2 += d * (y[t]! - mean)
  }
  return { mean, u: Math.sqrt(m2 / (y.length - 1)) }
}

export function monteCarloCoverage(model: (x: number[]) => number, inputs: Input[], options: CoverageOptions = {}): CoverageResult {
  const p = options.p ?? 0.95
  const shortest = options.shortest ?? false
  const normal = seededNormal(options.seed ?? 20081)
  const x = new Array<number>(inputs.length)
  const draw = (M: number) => {
    const y = new Float64Array(M)
    for (let t = 0; t < M; t++) {
      for (let i = 0; i < inputs.length; i++) x[i] = inputs[i]!.value + inputs[i]!.u * normal()
      y[t] = model(x)
    }
    return y
  }
  const summarise = (y: Float64Array, converged: boolean): CoverageResult => {
    const { mean, u } = meanAndU(y)
    const sorted = y.slice().sort()
    const interval = intervalOf(sorted, p, shortest)
    const expandedU = (interval[1] - interval[0]) / 2
    return { mean, u, trials: y.length, p, kind: shortest ? 'shortest' : 'probabilistically-symmetric', interval, expandedU, k: u > 0 ? expandedU / u : Number.NaN, converged }
  }
  if (options.trials) return summarise(draw(options.trials), true)

  const M = Math.max(Math.ceil(100 / (1 - p)), 10_000)
  const maxTrials = options.maxTrials ?? 2_000_000
  const digits = options.digits ?? 2
  const runs: Float64Array[] = []
  const stats: number[][] = []
  while (runs.length * M < maxTrials) {
    const y = draw(M)
    runs.push(y)
    const s = summarise(y, false)
    stats.push([s.mean, s.u, s.interval[0], s.interval[1]])
    if (runs.length < 2) continue
    const h = runs.length
    const sds = [0, 1, 2, 3].map((j) => {
      const avg = stats.reduce((a, r) => a + r[j]!, 0) / h
      return Math.sqrt(stats.reduce((a, r) => a + (r[j]! - avg) ** 2, 0) / (h * (h - 1)))
    })
    const uAll = stats.reduce((a, r) => a + r[1]!, 0) / h
    // u = c·10^l with c of `digits` digits: δ = ½·10^l (7.9.2)
    const l = Math.floor(Math.log10(uAll)) - (digits - 1)
    const delta = 0.5 * 10 ** l
    if (sds.every(s => 2 * s <= delta)) {
      const all = new Float64Array(h * M)
      runs.forEach((r, i) => all.set(r, i * M))
      return summarise(all, true)
    }
  }
  const all = new Float64Array(runs.length * M)
  runs.forEach((r, i) => all.set(r, i * M))
  return summarise(all, false)
}
