import { EngineError } from '../errors'
import { acceptedValue } from './referenceMaterials'
import { weightedMean, yorkFit, type LineFit } from './regression'
import { measuredItems, type DeltaWork } from './deltaSteps'
import type { MaterialValues, Measured, Normalisation, OutcomeFlag } from './types'

// Normalisation to the international scale: accepted = a + b·measured, fitted on the anchor
// standards (each anchor's acquisitions averaged first) with errors in both variables
// (York et al., Am. J. Phys. 72 (2004) 367). Two anchors: the classic two-point normalisation
// (Coplen, Rapid Commun. Mass Spectrom. 25 (2011) 2538; Paul, Skrzypek & Fórizs, Rapid Commun.
// Mass Spectrom. 21 (2007) 3006); one anchor: a shift only, b = 1 exactly.

export const NORMALISATION_SOURCE = 'York et al., Am. J. Phys. 72 (2004) 367 (fit); Paul, Skrzypek & Fórizs, Rapid Commun. Mass Spectrom. 21 (2007) 3006 (multi-point normalisation); GUM JCGM 100:2008 5.2 (propagation with cov(a, b))'

export interface NormaliseResult {
  fit: LineFit
  normalisation: Normalisation
}

/** The anchors of one quantity: accepted value and the weighted mean of its acquisitions. */
function anchorPoints(work: DeltaWork[], quantity: string, scale: string, anchors: string[], materials: Record<string, MaterialValues>) {
  return anchors.flatMap((id) => {
    const accepted = acceptedValue(materials[id]!, quantity, scale)
    if (!accepted) return []
    const items = work.filter(w => measuredItems(w) && w.item.role !== 'sample' && w.item.material === id && w.values[quantity])
    if (!items.length) return []
    const mean = weightedMean(items.map(w => w.values[quantity]!))
    return [{ material: id, positions: items.map(w => w.item.position), accepted, measuredMean: { value: mean.value, u: mean.u }, ...(items.length > 1 ? { reducedChi2: mean.chi2 / (items.length - 1) } : {}) }]
  })
}

/**
 * Fits one quantity and rewrites every measured acquisition's value onto the scale:
 * δ = a + b·x, u²(δ) = u²(a) + x²·u²(b) + 2x·cov(a, b) + b²·u²(x) (GUM 5.2.2).
 */
export function normaliseQuantity(work: DeltaWork[], quantity: string, scale: string, anchors: string[], materials: Record<string, MaterialValues>, stepField: string): NormaliseResult {
  const points = anchorPoints(work, quantity, scale, anchors, materials)
  if (!points.length) throw new EngineError(`${stepField}.anchors`, 'no-anchor-for-quantity', `none of the anchors has an accepted ${quantity} on ${scale} and was measured in this sequence`)
  let fit: LineFit
  if (points.length === 1) {
    const p = points[0]!
    fit = { intercept: p.accepted.value - p.measuredMean.value, slope: 1, uIntercept: Math.hypot(p.accepted.u, p.measuredMean.u), uSlope: 0, covariance: 0, chi2: 0, dof: 0 }
  }
  else {
    const spread = Math.max(...points.map(p => p.accepted.value)) - Math.min(...points.map(p => p.accepted.value))
    if (!(spread > 0)) throw new EngineError(`${stepField}.anchors`, 'anchors-degenerate', `the anchors of ${quantity} share one accepted value: they cannot fix a slope`)
    fit = yorkFit(points.map(p => p.measuredMean.value), points.map(p => p.measuredMean.u), points.map(p => p.accepted.value), points.map(p => p.accepted.u))
  }
  const onScale = (x: Measured): Measured => ({
    value: fit.intercept + fit.slope * x.value,
    u: Math.sqrt(Math.max(0, fit.uIntercept ** 2 + (x.value * fit.uSlope) ** 2 + 2 * x.value * fit.covariance + (fit.slope * x.u) ** 2)),
  })
  for (const w of work.filter(measuredItems)) {
    const v = w.values[quantity]
    if (v) w.values[quantity] = onScale(v)
  }
  const anchorsOut = points.map(p => ({ ...p, residual: fit.intercept + fit.slope * p.measuredMean.value - p.accepted.value }))
  return {
    fit,
    normalisation: {
      quantity,
      scale,
      slope: { value: fit.slope, u: fit.uSlope },
      intercept: { value: fit.intercept, u: fit.uIntercept },
      covariance: fit.covariance,
      rmsResidual: Math.sqrt(anchorsOut.reduce((s, a) => s + a.residual ** 2, 0) / anchorsOut.length),
      anchors: anchorsOut,
    },
  }
}

/**
 * The 99 % quantile of χ²_ν/ν by the Wilson–Hilferty approximation,
 * χ²_p ≈ ν(1 − 2/(9ν) + z_p·√(2/(9ν)))³ with z_0.99 = 2.3263 (Wilson & Hilferty, PNAS 17 (1931) 684).
 */
export function reducedChi2Limit99(dof: number): number {
  const a = 2 / (9 * dof)
  return (1 - a + 2.3263 * Math.sqrt(a)) ** 3
}

/** An anchor whose acquisitions scatter beyond their stated u (χ²/ν above its 99 % quantile). */
export function anchorScatterFlags(n: Normalisation, flags: OutcomeFlag[]): void {
  for (const a of n.anchors) {
    if (a.reducedChi2 === undefined) continue
    const limit = reducedChi2Limit99(a.positions.length - 1)
    if (a.reducedChi2 > limit) flags.push({ code: 'anchor-scatter', message: `${a.material} ${n.quantity}: its ${a.positions.length} acquisitions scatter beyond their stated u (χ²/ν = ${a.reducedChi2.toFixed(2)} > ${limit.toFixed(2)}, 99 %)` })
  }
}

/** Samples outside the anchors' measured range are extrapolated: flagged, not refused. */
export function extrapolationFlags(work: DeltaWork[], quantity: string, measuredRange: [number, number], before: Map<DeltaWork, number>): void {
  if (measuredRange[0] === measuredRange[1]) return
  const margin = 0.05 * (measuredRange[1] - measuredRange[0])
  for (const w of work.filter(x => x.item.role === 'sample')) {
    const x = before.get(w)
    if (x !== undefined && (x < measuredRange[0] - margin || x > measuredRange[1] + margin)) {
      w.flags.push({ code: 'extrapolated', message: `${quantity} lies outside the anchors' range: the normalisation is extrapolated`, position: w.item.position })
    }
  }
}

/** Residuals of every standard with an accepted value, and the method's residual rule. */
export function standardResiduals(work: DeltaWork[], quantity: string, scale: string, materials: Record<string, MaterialValues>, maxResidual: number | undefined, flags: OutcomeFlag[]): Map<DeltaWork, number> {
  const out = new Map<DeltaWork, number>()
  for (const w of work.filter(x => measuredItems(x) && x.item.role !== 'sample' && x.item.material)) {
    const material = Object.hasOwn(materials, w.item.material!) ? materials[w.item.material!] : undefined
    const accepted = material && acceptedValue(material, quantity, scale)
    const v = w.values[quantity]
    if (!accepted || !v) continue
    const residual = v.value - accepted.value
    out.set(w, residual)
    if (maxResidual !== undefined && Math.abs(residual) > maxResidual) {
      const flag = { code: 'standard-residual', message: `${w.item.material} ${quantity} is ${residual.toFixed(3)} ‰ from its accepted value (limit ${maxResidual} ‰)`, position: w.item.position }
      w.flags.push(flag)
      flags.push(flag)
    }
  }
  return out
}
