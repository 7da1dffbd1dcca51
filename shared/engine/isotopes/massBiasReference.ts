import type { MethodStep } from '../../schemas/methods'
import { EngineError } from '../errors'
import { fractionationFromReference, type IsotopeRatio } from './massBias'
import type { Measured, OutcomeFlag, SequenceItem } from './types'

// Where the mass-bias factor of each acquisition comes from: x = R_known / R_measured of the
// reference ratio (see massBias.ts).
//  - against 'internal': the acquisition's own reference ratio (internal normalisation;
//    Russell et al., Geochim. Cosmochim. Acta 42 (1978) 1075);
//  - against 'standard': the air standards measured in the sequence (standard-sample
//    bracketing, common practice of noble-gas labs, no source): ln x interpolated linearly in
//    acquisition time between the standards just before and just after the acquisition, the
//    nearest one alone outside them (flagged 'mass-bias-not-bracketed'). ln x is a weighted sum
//    Σ w_s·(ln A − ln B_s), so u²(ln x) = u_rel²(A) + Σ w_s²·u_rel²(B_s) (GUM 5.1.2; the standards
//    are independent measurements, the accepted value A is common to all of them). A standard
//    itself is corrected from the other standards (leave one out), so that its residual says how
//    well the bracketing reproduces it rather than coming back exact by construction.

export interface ReferenceFactor {
  /** R_known / R_measured of the reference ratio at this acquisition. */
  x: number
  /** Relative standard uncertainty of the measured part of x (the accepted value's is added by the caller). */
  uRelMeasured: number
  /** Weight of this acquisition's own reference-ratio measurement in x (1 internal, w for a standard, else 0). */
  selfWeight: number
  /** The acquisitions (indices into the items) whose reference ratio made x, with their weights. */
  sources: { index: number, weight: number }[]
  flags: OutcomeFlag[]
}

type MassBiasStep = Extract<MethodStep, { step: 'mass-bias' }>
const CALIBRATING_ROLES = new Set(['working-standard', 'reference-gas'])

/** One factor per item (null for blanks) and the step's recorded parameters. */
export function massBiasFactors(
  step: MassBiasStep, items: SequenceItem[], refMeasured: (Measured | null)[], known: Measured, ref: IsotopeRatio, field: string,
): { perItem: (ReferenceFactor | null)[], parameters: Record<string, unknown> } {
  const materialId = step.material ?? 'AIR-Ar'
  if (step.against === 'internal') {
    const perItem = refMeasured.map((b, i) => (b ? { x: known.value / b.value, uRelMeasured: Math.abs(b.u / b.value), selfWeight: 1, sources: [{ index: i, weight: 1 }], flags: [] } : null))
    const parameters = {
      normalisation: 'internal',
      perItem: items.flatMap((item, i) => (refMeasured[i] ? [{ position: item.position, parameter: fractionationFromReference(step.law, refMeasured[i]!, known, ref) }] : [])),
    }
    return { perItem, parameters }
  }
  const standards = items
    .map((item, i) => ({ item, i, b: refMeasured[i] }))
    .filter(s => s.item.material === materialId && CALIBRATING_ROLES.has(s.item.role) && s.b)
    .sort((a, b) => a.item.acquiredAt - b.item.acquiredAt || a.item.position - b.item.position)
  if (standards.length === 0) {
    throw new EngineError(`${field}.material`, 'no-standard-in-sequence', `the method corrects mass bias against ${materialId} but the sequence has no working-standard or reference-gas acquisition of it`)
  }
  const lnX = standards.map(s => Math.log(known.value / s.b!.value))
  const relVar = standards.map(s => (s.b!.u / s.b!.value) ** 2)
  /** x at time t from the standards (one excluded: a standard is checked against the others). */
  const bracket = (t: number, position: number, exclude: number): ReferenceFactor => {
    const use = standards.map((s, j) => j).filter(j => j !== exclude)
    let after = use.findIndex(j => standards[j]!.item.acquiredAt >= t)
    if (after < 0) after = use.length
    const prev = after - 1
    if (prev < 0 || after >= use.length) {
      const j = use[prev < 0 ? 0 : prev]!
      const flag = { code: 'mass-bias-not-bracketed', message: `no ${materialId} standard on both sides: the one at position ${standards[j]!.item.position} alone corrects this acquisition`, position }
      return { x: Math.exp(lnX[j]!), uRelMeasured: Math.sqrt(relVar[j]!), selfWeight: 0, sources: [{ index: standards[j]!.i, weight: 1 }], flags: [flag] }
    }
    const [a, b] = [use[prev]!, use[after]!]
    const t0 = standards[a]!.item.acquiredAt
    const t1 = standards[b]!.item.acquiredAt
    const wAfter = t1 > t0 ? (t - t0) / (t1 - t0) : 0.5
    const wPrev = 1 - wAfter
    return {
      x: Math.exp(wPrev * lnX[a]! + wAfter * lnX[b]!),
      uRelMeasured: Math.sqrt(wPrev * wPrev * relVar[a]! + wAfter * wAfter * relVar[b]!),
      selfWeight: 0,
      sources: [{ index: standards[a]!.i, weight: wPrev }, { index: standards[b]!.i, weight: wAfter }],
      flags: [],
    }
  }
  const perItem = items.map((item, i): ReferenceFactor | null => {
    if (!refMeasured[i]) return null
    const own = standards.findIndex(s => s.i === i)
    // A lone standard can only be corrected by itself (its reference ratio then comes back exact).
    if (own >= 0 && standards.length === 1) return { x: Math.exp(lnX[own]!), uRelMeasured: Math.sqrt(relVar[own]!), selfWeight: 1, sources: [{ index: i, weight: 1 }], flags: [] }
    return bracket(item.acquiredAt, item.position, own)
  })
  const parameters = {
    normalisation: 'standard-bracketing',
    bracketing: 'ln(R_known/R_measured) interpolated linearly in acquisition time between the neighbouring standards',
    standardsChecked: standards.length > 1 ? 'each standard corrected from the other standards (leave one out), so its residual tests the bracketing' : 'one standard: corrected by itself',
    standards: standards.map(s => ({
      position: s.item.position, acquiredAt: s.item.acquiredAt, measured: s.b, parameter: fractionationFromReference(step.law, s.b!, known, ref),
    })),
  }
  return { perItem, parameters }
}
