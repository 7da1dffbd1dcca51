import type { Measured } from './types'

// Procedural blank: the gas the extraction line and the mass spectrometer give with no sample,
// measured as blank acquisitions in the sequence and subtracted from every other acquisition,
// beam by beam (common practice of noble-gas and gas-source labs, no source). The blank level is
// the mean of the blank acquisitions. The blank inside a sample's run is not that mean but a new
// draw of a blank that varies from run to run, so its standard uncertainty is the prediction
// uncertainty of a new observation, u = σ̂·√(1 + 1/n) (Draper & Smith, Applied Regression
// Analysis, 3rd ed., Wiley 1998, ch. 1, from memory), with σ̂ = max(s, rms u_i): the blanks'
// scatter s, but never less than what each blank's own measurement u_i says one blank scatters by
// (with n = 2 blanks s rests on one degree of freedom and is often far too small). Its degrees of
// freedom: n − 1 where s sets σ̂, else those of the u_i by Welch–Satterthwaite (GUM G.4.1).

export interface BlankLevel extends Measured {
  /** Number of blank acquisitions averaged. */
  n: number
  /** 'scatter' (s set σ̂, n ≥ 2) or 'stated' (the blanks' own u set it). */
  basis: 'scatter' | 'stated'
  /** Degrees of freedom of u; infinite (JSON: null) when the blanks' stated u have none stated. */
  dof: number
}

export const BLANK_SOURCE = 'procedural blank: mean of the sequence\'s blank acquisitions; u = max(s, rms u_i)·√(1 + 1/n), the prediction of a new draw (Draper & Smith, Applied Regression Analysis, 3rd ed., 1998, ch. 1), ν by Welch–Satterthwaite (GUM JCGM 100:2008, G.4.1)'

/**
 * Mean blank per beam over the blank acquisitions; only beams every blank measured. `dofs[i][beam]`:
 * degrees of freedom of blank i's u for that beam (absent: unknown, taken as infinite).
 */
export function blankLevels(blanks: Record<string, Measured>[], dofs: Record<string, number>[] = []): Record<string, BlankLevel> {
  const out: Record<string, BlankLevel> = {}
  if (blanks.length === 0) return out
  const keys = Object.keys(blanks[0]!).filter(k => blanks.every(b => Object.hasOwn(b, k)))
  for (const key of keys) {
    const values = blanks.map(b => b[key]!.value)
    const n = values.length
    const mean = values.reduce((s, v) => s + v, 0) / n
    const ownVar = blanks.reduce((s, b) => s + b[key]!.u ** 2, 0) / n
    // ν of rms u_i: (Σu_i²)² / Σ(u_i⁴/ν_i) (GUM G.4.1).
    const ownDenom = blanks.reduce((s, b, i) => s + b[key]!.u ** 4 / (dofs[i]?.[key] ?? Number.POSITIVE_INFINITY), 0)
    const ownDof = ownDenom > 0 ? (n * ownVar) ** 2 / ownDenom : Number.POSITIVE_INFINITY
    const s2 = n > 1 ? values.reduce((s, v) => s + (v - mean) ** 2, 0) / (n - 1) : 0
    const scatter = n > 1 && s2 > ownVar
    out[key] = {
      value: mean,
      u: Math.sqrt((scatter ? s2 : ownVar) * (1 + 1 / n)),
      n,
      basis: scatter ? 'scatter' : 'stated',
      dof: scatter ? n - 1 : ownDof,
    }
  }
  return out
}
