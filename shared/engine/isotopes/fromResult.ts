import { EngineError } from '../errors'
import type { EngineResult, ResultPeak } from '../pipeline'
import type { Measured, SequenceItem, SequenceRole } from './types'

// From what the sector engine measured of one acquisition (EngineResult) to the sequence's
// view of it: beams keyed by nominal m/z and ratios keyed "heavy/light" nominal m/z.

export interface SequenceItemMeta {
  position: number
  role: SequenceRole
  material?: string
  acquiredAt: number
}

export interface FromResultOptions {
  /** Ratios to carry, e.g. ["45/44", "46/44"]; default none beyond those the engine reported. */
  ratios?: string[]
  /**
   * A peak counts for nominal m/z n when its centroid is within this of n (u/e); default 0.3,
   * well inside the 0.5 that separates neighbours (common practice, no source).
   */
  nominalTolerance?: number
  /** m/z pair → index in result.ratios of the engine's ratio that measured it, e.g. { "45/44": 0 }. */
  engineRatios?: Record<string, number>
}

/**
 * The beam of a peak: static readings carry the cup's mean signal as their area, in amperes (or
 * counts/s); a swept peak's area is divided by its m/z, since at constant resolving power a
 * peak's width in m/z grows with m/z and area/(m/z) is proportional to the ion current (the
 * same reading the engine's own ratios use, shared/engine/pipeline.ts). That quotient is not a
 * current in amperes (its unit is A, scaled by the sweep's dwell and resolving power), so the
 * item says so (beamKind 'peak-area') and the H3+ step refuses it.
 */
function beamOf(p: ResultPeak, mode: EngineResult['mode']): Measured {
  return mode === 'sweep' ? { value: p.area / p.centroid, u: p.areaU / p.centroid } : { value: p.area, u: p.areaU }
}

export function sequenceItemFromResult(result: EngineResult, meta: SequenceItemMeta, options: FromResultOptions = {}): SequenceItem {
  const tolerance = options.nominalTolerance ?? 0.3
  const beams: Record<string, Measured> = {}
  const chosen = new Map<string, ResultPeak>()
  for (const p of result.peaks) {
    const nominal = Math.round(p.centroid)
    if (Math.abs(p.centroid - nominal) > tolerance) continue
    const key = String(nominal)
    // Two peaks at one nominal mass (an interference resolved by the sweep): the larger is the
    // gas's beam; the other is left out, as it is not the isotopologue the ratio means.
    const held = chosen.get(key)
    if (!held || Math.abs(p.area) > Math.abs(held.area)) chosen.set(key, p)
  }
  for (const [key, p] of chosen) beams[key] = beamOf(p, result.mode)

  const ratios: Record<string, Measured> = {}
  // Ratios the engine reported carry what it knew beyond two areas: the shared-baseline
  // covariance of a sweep, or the cycle statistics of static readings. The caller says which
  // of its ratio requests measured which m/z pair (the engine labels them by isotope).
  for (const [key, index] of Object.entries(options.engineRatios ?? {})) {
    const r = result.ratios[index]
    if (!r) throw new EngineError(`engineRatios.${key}`, 'unknown', `the result has no ratio ${index}`)
    ratios[key] = { value: r.ratio, u: r.ratioU }
  }
  for (const key of options.ratios ?? []) {
    if (Object.hasOwn(ratios, key)) continue
    const [h, l] = key.split('/')
    if (!h || !l || !/^\d+$/.test(h) || !/^\d+$/.test(l)) throw new EngineError(`ratios.${key}`, 'bad-ratio', 'a ratio is "heavy/light" nominal m/z, e.g. "45/44"')
    const hb = beams[h]
    const lb = beams[l]
    if (!hb || !lb || !(lb.value > 0)) continue
    const value = hb.value / lb.value
    // GUM 5.1.6: uncorrelated beams (the engine gave no covariance for this pair).
    ratios[key] = { value, u: Math.abs(value) * Math.hypot(hb.u / hb.value, lb.u / lb.value) }
  }
  return { position: meta.position, role: meta.role, ...(meta.material ? { material: meta.material } : {}), acquiredAt: meta.acquiredAt, beams, beamKind: result.mode === 'sweep' ? 'peak-area' : 'mean-current', ratios }
}
