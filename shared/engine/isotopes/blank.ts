import type { Measured } from './types'

// Procedural blank: the gas the extraction line and the mass spectrometer give with no sample,
// measured as blank acquisitions in the sequence and subtracted from every other acquisition,
// beam by beam (common practice of noble-gas and gas-source labs, no source). The blank is the
// mean of the blank acquisitions; its standard uncertainty is their scatter over the count,
// s/√n (GUM, JCGM 100:2008, 4.2.3), or the single blank's own stated u when there is one. This
// assumes every run sees the same blank; a blank that varies from run to run would call for
// s·√(1 + 1/n) instead.

export interface BlankLevel extends Measured {
  /** Number of blank acquisitions averaged. */
  n: number
  /** 'scatter' (s/√n, n ≥ 2) or 'stated' (one blank: its own u). */
  basis: 'scatter' | 'stated'
}

export const BLANK_SOURCE = 'procedural blank: mean of the sequence\'s blank acquisitions, u = s/√n (GUM JCGM 100:2008, 4.2.3)'

/** Mean blank per beam over the blank acquisitions; only beams every blank measured. */
export function blankLevels(blanks: Record<string, Measured>[]): Record<string, BlankLevel> {
  const out: Record<string, BlankLevel> = {}
  if (blanks.length === 0) return out
  const keys = Object.keys(blanks[0]!).filter(k => blanks.every(b => Object.hasOwn(b, k)))
  for (const key of keys) {
    const values = blanks.map(b => b[key]!.value)
    const n = values.length
    const mean = values.reduce((s, v) => s + v, 0) / n
    if (n === 1) { out[key] = { value: mean, u: blanks[0]![key]!.u, n, basis: 'stated' }; continue }
    const s2 = values.reduce((s, v) => s + (v - mean) ** 2, 0) / (n - 1)
    out[key] = { value: mean, u: Math.sqrt(s2 / n), n, basis: 'scatter' }
  }
  return out
}
