import { EngineError } from './errors'

// Spectral fingerprints: stick spectra (m/z, intensity) binned onto a common grid and
// compared by the normalised dot product (cosine similarity), 1 for identical patterns.

export interface Stick { mz: number, intensity: number }
export interface ReferenceSpectrum { id: string, name: string, sticks: Stick[] }

function binned(sticks: Stick[], binWidth: number): Map<number, number> {
  const bins = new Map<number, number>()
  for (const s of sticks) {
    if (!(s.intensity >= 0) || !Number.isFinite(s.mz)) throw new EngineError('sticks', 'not-finite', 'm/z and intensity must be finite, intensity not negative')
    const key = Math.round(s.mz / binWidth)
    bins.set(key, (bins.get(key) ?? 0) + s.intensity)
  }
  return bins
}

export function cosineSimilarity(a: Stick[], b: Stick[], binWidth = 0.5): number {
  const x = binned(a, binWidth)
  const y = binned(b, binWidth)
  let dot = 0
  let nx = 0
  let ny = 0
  for (const [k, v] of x) { nx += v * v; dot += v * (y.get(k) ?? 0) }
  for (const v of y.values()) ny += v * v
  return nx > 0 && ny > 0 ? dot / Math.sqrt(nx * ny) : 0
}

/** Reference spectra ranked by similarity to `sample`, best first. */
export function rankMatches(sample: Stick[], references: ReferenceSpectrum[], binWidth = 0.5) {
  return references
    .map(r => ({ id: r.id, name: r.name, similarity: cosineSimilarity(sample, r.sticks, binWidth) }))
    .sort((a, b) => b.similarity - a.similarity || a.name.localeCompare(b.name))
}
