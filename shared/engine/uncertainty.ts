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
