import { EngineError } from '../errors'
import { acceptedValue } from './referenceMaterials'
import { weightedMean, yorkFit, type LineFit } from './regression'
import { measuredItems, withoutKey, type DeltaWork } from './deltaSteps'
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
    const weights = items.map(w => 1 / Math.max(w.values[quantity]!.u, 1e-12) ** 2)
    // The mean's sensitivity to the drift slope's error, weighted as the mean is.
    const driftSensitivity = items.reduce((s, w, i) => s + weights[i]! * (w.drift?.[quantity]?.sensitivity ?? 0), 0) / weights.reduce((s, v) => s + v, 0)
    return [{ material: id, positions: items.map(w => w.item.position), accepted, measuredMean: { value: mean.value, u: mean.u }, driftSensitivity, ...(items.length > 1 ? { reducedChi2: mean.chi2 / (items.length - 1) } : {}) }]
  })
}

/**
 * Fits one quantity and rewrites every measured acquisition's value onto the scale:
 * δ = a + b·x, u²(δ) = u²(a) + x²·u²(b) + 2x·cov(a, b) + b²·u²(x) (GUM 5.2.2).
 */
export function normaliseQuantity(work: DeltaWork[], quantity: string, scale: string, anchors: string[], materials: Record<string, MaterialValues>, stepField: string): NormaliseResult {
  const points = anchorPoints(work, quantity, scale, anchors, materials)
  if (!points.length) throw new EngineError(`${stepField}.anchors`, 'no-anchor-for-quantity', `none of the anchors has an accepted ${quantity} on ${scale} and was measured in this sequence`)
  if (points.length > 1) {
    const spread = Math.max(...points.map(p => p.accepted.value)) - Math.min(...points.map(p => p.accepted.value))
    if (!(spread > 0)) throw new EngineError(`${stepField}.anchors`, 'anchors-degenerate', `the anchors of ${quantity} share one accepted value: they cannot fix a slope`)
  }
  const fitAt = (shift: number): LineFit => {
    const xs = points.map(p => p.measuredMean.value + shift * p.driftSensitivity)
    if (points.length === 1) {
      const p = points[0]!
      return { intercept: p.accepted.value - xs[0]!, slope: 1, uIntercept: Math.hypot(p.accepted.u, p.measuredMean.u), uSlope: 0, covariance: 0, chi2: 0, dof: 0 }
    }
    return yorkFit(xs, points.map(p => p.measuredMean.u), points.map(p => p.accepted.value), points.map(p => p.accepted.u))
  }
  const fit = inflateByMswd(fitAt(0))
  // The drift slope's error moves the anchors and the acquisition together: its contribution
  // is the change of a + b·x when b_drift moves by its u (anchors refitted), GUM 5.2.2.
  const driftU = work.find(w => w.drift?.[quantity])?.drift![quantity]!.u ?? 0
  const shifted = driftU > 0 ? fitAt(driftU) : fit
  const onScale = (w: DeltaWork, x: Measured): Measured => {
    const value = fit.intercept + fit.slope * x.value
    const sensitivity = w.drift?.[quantity]?.sensitivity ?? 0
    const driftPart = shifted.intercept + shifted.slope * (x.value + driftU * sensitivity) - value
    return { value, u: Math.sqrt(Math.max(0, fit.uIntercept ** 2 + (x.value * fit.uSlope) ** 2 + 2 * x.value * fit.covariance + (fit.slope * x.u) ** 2 + driftPart ** 2)) }
  }
  for (const w of work.filter(measuredItems)) {
    const v = w.values[quantity]
    if (v) w.values[quantity] = onScale(w, v)
    if (w.drift) w.drift = withoutKey(w.drift, quantity)
  }
  const anchorsOut = points.map(({ driftSensitivity: _, ...p }) => ({ ...p, residual: fit.intercept + fit.slope * p.measuredMean.value - p.accepted.value }))
  return {
    fit,
    normalisation: {
      quantity,
      scale,
      slope: { value: fit.slope, u: fit.uSlope },
      intercept: { value: fit.intercept, u: fit.uIntercept },
      covariance: fit.covariance,
      ...(fit.dof > 0 ? { mswd: fit.chi2 / fit.dof } : {}),
      rmsResidual: Math.sqrt(anchorsOut.reduce((s, a) => s + a.residual ** 2, 0) / anchorsOut.length),
      anchors: anchorsOut,
    },
  }
}

/**
 * More than two anchors whose scatter about the line exceeds what their u (replicate scatter
 * included) explain: u(a), u(b) scaled by √MSWD and cov(a, b) by MSWD, MSWD = χ²/ν, ν = n − 2
 * (York et al., Am. J. Phys. 72 (2004) 367, their note on the goodness of fit; the Birge ratio,
 * common practice). Below 1 nothing is shrunk: the stated u are kept.
 */
export function inflateByMswd(fit: LineFit): LineFit {
  if (!(fit.dof > 0)) return fit
  const mswd = fit.chi2 / fit.dof
  if (!(mswd > 1)) return fit
  return { ...fit, uIntercept: fit.uIntercept * Math.sqrt(mswd), uSlope: fit.uSlope * Math.sqrt(mswd), covariance: fit.covariance * mswd }
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
