import { measuredItems, type DeltaWork } from './deltaSteps'

// Run-to-run reproducibility: the scatter of repeated standards that their counting-noise u does
// not explain (source conditions, inlet, peak shape from one acquisition to the next). Real
// scatter is often several times counting noise (Skrzypek, Anal. Bioanal. Chem. 405 (2013) 2815;
// Szpak, Metcalfe & Macdonald, J. Archaeol. Sci. Rep. 13 (2017) 609; from memory).

export interface Reproducibility {
  quantity: string
  /**
   * The excess standard deviation of one acquisition, ‰ of the ratio (0 when the stated u
   * explain the scatter); in δ it is s·(1 + δ/1000).
   */
  s: number
  /** Pooled Type A degrees of freedom (Σ over replicated standards of n − parameters). */
  dof: number
  /** Replicate scatter against the stated u before the term: χ²/ν (absent without replicates). */
  reducedChi2?: number
  /**
   * Per replicated standard: its scatter against its stated u plus the reproducibility pooled
   * from the OTHER standards (leave-one-out), χ²/ν, so that one bad standard cannot hide by
   * inflating the pooled term it is judged against.
   */
  materials: { material: string, n: number, dof: number, reducedChi2: number }[]
}

/**
 * Type A reproducibility from replicate standards (GUM JCGM 100:2008 4.2.3, with the pooled
 * estimate of 4.2.8): every standard measured n ≥ 2 times gives residuals about its own mean;
 * with a drift model (`line`), about its mean plus one slope common to all standards (analysis
 * of covariance; common practice, no source), ν = N − M − 1, so that neither the drift nor the
 * error of a slope fitted on few points is taken for scatter. The excess per-acquisition
 * variance is the moment estimate
 *   s² = max(0, (Σ r² − Σ u²·(n − 1)/n) / ν),
 * the pooled variance of the replicates less what their stated u (and the variance of their
 * bracketing reference gas, a shared term not in u) already explain, so counting noise is not
 * counted twice. s² is added to every measured acquisition's u² (a sample measured
 * once carries one acquisition's reproducibility; an anchor's mean carries s²/n through its
 * weighted mean; the drift fit weights its points with it). The normalisation's χ²/ν (MSWD)
 * over more than two anchors is then a different quantity, the anchors' scatter about the line
 * beyond their replicate scatter and accepted u, and inflates the line's covariance only for
 * that (deltaNormalise.ts): no double counting.
 */
export function addReproducibility(work: DeltaWork[], quantity: string, line?: { x: (w: DeltaWork) => number }): Reproducibility {
  const groups = new Map<string, DeltaWork[]>()
  for (const w of work.filter(x => measuredItems(x) && x.item.role !== 'sample' && x.item.material && x.values[quantity])) {
    groups.set(w.item.material!, [...(groups.get(w.item.material!) ?? []), w])
  }
  // Relative to the ratio: an acquisition's fractionation moves δ by φ·(1 + δ/1000), which
  // matters across δ2H's 430 ‰ between VSMOW2 and SLAP2; so residuals of 1000·ln(1 + δ/1000)
  // (whose slope in δ is 1/(1 + δ/1000)) against u/(1 + δ/1000).
  const sets = [...groups].filter(([, ws]) => ws.length >= 2).map(([material, ws]) => {
    const y = ws.map(w => 1000 * Math.log(rel(w.values[quantity]!.value)))
    const x = line ? ws.map(line.x) : ws.map(() => 0)
    const my = y.reduce((s, v) => s + v, 0) / y.length
    const mx = x.reduce((s, v) => s + v, 0) / x.length
    return { material, n: ws.length, y: y.map(v => v - my), x: x.map(v => v - mx), u: ws.map(w => Math.sqrt(w.values[quantity]!.u ** 2 + (w.refVar?.[quantity] ?? 0)) / rel(w.values[quantity]!.value)) }
  })
  const sxx = sets.reduce((s, g) => s + g.x.reduce((t, v) => t + v * v, 0), 0)
  const slope = line && sxx > 0 ? sets.reduce((s, g) => s + g.x.reduce((t, v, i) => t + v * g.y[i]!, 0), 0) / sxx : 0
  const parts = sets.map((g) => {
    const r = g.y.map((v, i) => v - slope * g.x[i]!)
    return { ...g, r, dof: g.n - 1, sumR2: r.reduce((s, v) => s + v * v, 0), expected: g.u.reduce((s, u) => s + u * u, 0) * (g.n - 1) / g.n }
  })
  const slopeDof = line && sxx > 0 ? 1 : 0
  const pooled = (list: typeof parts, lessDof: number) => {
    const dof = list.reduce((s, x) => s + x.dof, 0) - lessDof
    return dof > 0 ? Math.max(0, (list.reduce((s, x) => s + x.sumR2 - x.expected, 0)) / dof) : 0
  }
  const dof = Math.max(0, parts.reduce((s, x) => s + x.dof, 0) - slopeDof)
  const s = Math.sqrt(pooled(parts, slopeDof))
  const chi2 = parts.reduce((sum, x) => sum + x.r.reduce((t, r, i) => t + (r / Math.max(x.u[i]!, 1e-12)) ** 2, 0), 0)
  const materials = parts.map((x) => {
    const s2 = pooled(parts.filter(o => o !== x), slopeDof)
    return { material: x.material, n: x.n, dof: x.dof, reducedChi2: x.r.reduce((t, r, i) => t + r * r / (x.u[i]! ** 2 + s2), 0) / x.dof }
  })
  if (s > 0) {
    for (const w of work.filter(measuredItems)) {
      const v = w.values[quantity]
      if (v) w.values[quantity] = { value: v.value, u: Math.hypot(v.u, s * rel(v.value)) }
    }
  }
  return { quantity, s, dof, ...(dof > 0 ? { reducedChi2: chi2 / dof } : {}), materials }
}

const rel = (delta: number) => 1 + delta / 1000
