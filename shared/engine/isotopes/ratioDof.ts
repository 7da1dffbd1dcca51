import { coverageFactor } from './studentT'
import type { Measured } from './types'

// Degrees of freedom of a corrected ratio and its coverage factor. Written in the beams it comes
// from, a mass-bias corrected ratio is
//   ln R = ln n_q − ln d_q + e·ln A − e·Σ_s w_s·(ln n_ref,s − ln d_ref,s)
// (massBias.ts, massBiasReference.ts: s runs over the acquisitions whose reference ratio made x,
// the acquisition itself for internal normalisation), a sum of independent beams, each with the
// degrees of freedom of its time-zero fit (n − 2) and blank (n_blank − 1); a beam that appears twice
// (the shared denominator) has its coefficients added, which is the shared-denominator covariance.
// ν_eff by the Welch–Satterthwaite formula and k = t₉₅(ν_eff) (GUM, JCGM 100:2008, G.4.1 and G.6.4).
// Where the ratios came as stated (no beam-level step), their degrees of freedom are unknown and k = 2
// (GUM 6.3.3).

export const DOF_SOURCE = 'effective degrees of freedom by Welch–Satterthwaite, k = t_p(ν_eff) at p = 95.45 %, the level of k = 2 for a normal output, as the δ systems use (GUM JCGM 100:2008, G.4.1, G.6.4, Table G.2)'

export interface DofComponent { relU: number, dof: number }

/** ν_eff = u⁴ / Σ uᵢ⁴/νᵢ (GUM G.4.1); infinite when every component is. */
export function welchSatterthwaite(components: readonly DofComponent[]): number {
  let u2 = 0
  let denom = 0
  for (const c of components) {
    u2 += c.relU * c.relU
    if (Number.isFinite(c.dof) && c.dof > 0) denom += c.relU ** 4 / c.dof
  }
  return denom > 0 ? (u2 * u2) / denom : Number.POSITIVE_INFINITY
}

export interface BeamSource {
  beams: Record<string, Measured>
  dof: Record<string, number>
}

/**
 * ν_eff and k of quantity `num/den` of acquisition `own`, corrected with sensitivity e from the
 * reference ratio `refNum/refDen` of `sources` (weights w) and the accepted value's relative u.
 */
export function correctedRatioDof(
  own: BeamSource, key: string, refKey: string, e: number, sources: { beams: BeamSource, weight: number }[], acceptedRelU: number,
): { dof: number, k: number } {
  const coefficients = new Map<string, { c: number, relU: number, dof: number }>()
  const ids = new Map<BeamSource, number>()
  const add = (src: BeamSource, beam: string, c: number) => {
    if (!ids.has(src)) ids.set(src, ids.size)
    const id = `${ids.get(src)}:${beam}`
    const b = src.beams[beam]
    if (!b) return
    const prev = coefficients.get(id)
    if (prev) prev.c += c
    else coefficients.set(id, { c, relU: Math.abs(b.u / b.value), dof: src.dof[beam] ?? Number.POSITIVE_INFINITY })
  }
  const [n, d] = key.split('/') as [string, string]
  const [rn, rd] = refKey.split('/') as [string, string]
  add(own, n, 1)
  add(own, d, -1)
  for (const s of sources) { add(s.beams, rn, -e * s.weight); add(s.beams, rd, e * s.weight) }
  const components: DofComponent[] = [...coefficients.values()].map(v => ({ relU: Math.abs(v.c) * v.relU, dof: v.dof }))
  components.push({ relU: Math.abs(e) * acceptedRelU, dof: Number.POSITIVE_INFINITY })
  const dof = welchSatterthwaite(components)
  return { dof, k: Number.isFinite(dof) ? coverageFactor(dof) : 2 }
}
