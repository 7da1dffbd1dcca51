import { EngineError } from '../errors'
import { propagate } from '../uncertainty'
import { composeDelta, co2DeltasFromMolecular, co2DeltasWithU, o2DeltasFromMolecular } from './isotopologues'
import { VPDB_TO_VSMOW_18O, vpdbToVsmow18O, vsmowToVpdb18O } from './referenceMaterials'
import { weightedLine } from './regression'
import { foldDrift, measuredItems, type DeltaWork } from './deltaSteps'
import type { DriftFit, GasSystem, Measured } from './types'

// From molecular δ against the reference gas to atomic δ on the international scale, and the
// drift correction on that scale.

/** The quantities each gas is reported in. */
export const gasQuantities: Record<Exclude<GasSystem, 'Ar'>, string[]> = {
  CO2: ['δ13C', 'δ18O'],
  N2: ['δ15N'],
  O2: ['δ18O', 'δ17O'],
  H2: ['δ2H'],
}

export interface ScaleContext {
  gas: Exclude<GasSystem, 'Ar'>
  /** The scale of each quantity. */
  scales: Record<string, string>
  /** The reference gas's δ on the scale, by quantity. */
  referenceGas: Record<string, Measured>
  /**
   * Whether u of the reference gas's assigned δ is added: not when a normalisation follows,
   * since an error common to every acquisition is removed by it (to first order).
   */
  includeReferenceU: boolean
  /** Values only (shared-term reruns): u of each quantity taken from the first run. */
  uOf?: (w: DeltaWork, quantity: string) => number | undefined
}

/**
 * CO2, the oxygen-17 step: δ45 and δ46 against the reference gas → δ13C (VPDB) and δ18O
 * (VPDB-CO2, or VSMOW by Brand et al. 2014) through the exact isotopologue equations with the
 * Brand et al. (2010) parameter set.
 */
export function co2ToScale(work: DeltaWork[], ctx: ScaleContext): void {
  const oxygenVsmow = ctx.scales['δ18O'] === 'VSMOW'
  const ref18 = ctx.referenceGas['δ18O']!
  const ref = { d13C: ctx.referenceGas['δ13C']!, d18O: oxygenVsmow ? vsmowToVpdb18O(ref18) : ref18 }
  for (const w of work.filter(measuredItems)) {
    if (ctx.uOf) {
      const v = co2DeltasFromMolecular(w.values['δ45']!.value, w.values['δ46']!.value, { d13C: ref.d13C.value, d18O: ref.d18O.value })
      w.values['δ13C'] = { value: v.d13C, u: ctx.uOf(w, 'δ13C') ?? 0 }
      w.values['δ18O'] = { value: oxygenVsmow ? vpdbToVsmow18O({ value: v.d18O, u: 0 }).value : v.d18O, u: ctx.uOf(w, 'δ18O') ?? 0 }
      continue
    }
    const out = co2DeltasWithU(w.values['δ45']!, w.values['δ46']!, ref, ctx.includeReferenceU)
    w.values['δ13C'] = out.d13C
    w.values['δ18O'] = oxygenVsmow ? vpdbToVsmow18O(out.d18O) : out.d18O
    carryRefVar(w, ['δ45', 'δ46'], ['δ13C', 'δ18O'], x => co2DeltasWithU(x[0]!, x[1]!, ref, false), out => [out.d13C.u, (oxygenVsmow ? VPDB_TO_VSMOW_18O.factor : 1) * out.d18O.u])
  }
}

/** The reference-gas variance of molecular δ carried onto the scale's quantities by the same model. */
function carryRefVar<T>(w: DeltaWork, from: string[], to: string[], model: (x: Measured[]) => T, us: (out: T) => number[]): void {
  if (!from.every(k => w.refVar?.[k] !== undefined)) return
  const out = us(model(from.map(k => ({ value: w.values[k]!.value, u: Math.sqrt(w.refVar![k]!) }))))
  w.refVar = { ...w.refVar, ...Object.fromEntries(to.map((q, i) => [q, out[i]! ** 2])) }
}

/**
 * N2, H2 and O2: molecular δ to atomic δ exactly (29R = 2·15R and 3R = 2·2R, so the δ are
 * equal; O2 by its isotopologue equations), then composed with the reference gas's δ on the
 * scale: δ_scale = (1 + δ_ref-gas)(1 + δ_gas,scale) − 1.
 */
export function moleculesToScale(work: DeltaWork[], ctx: ScaleContext): void {
  const refU = (q: string) => ctx.includeReferenceU ? ctx.referenceGas[q]!.u : 0
  for (const w of work.filter(measuredItems)) {
    if (ctx.gas === 'N2' || ctx.gas === 'H2') {
      const [q, m] = ctx.gas === 'N2' ? ['δ15N', 'δ29'] : ['δ2H', 'δ3']
      const d = w.values[m]!
      const r = ctx.referenceGas[q]!
      const p = propagate(x => composeDelta(x[0]!, x[1]!), [d, { value: r.value, u: refU(q) }])
      w.values[q] = { value: p.value, u: p.u }
      if (w.refVar?.[m] !== undefined) w.refVar = { ...w.refVar, [q]: w.refVar[m]! * (1 + r.value / 1000) ** 2 }
    }
    else {
      const d34 = w.values['δ34']!
      const d33 = w.values['δ33']
      const r18 = ctx.referenceGas['δ18O']!
      const r17 = ctx.referenceGas['δ17O']
      const inputs = [d34, d33 ?? { value: 0, u: 0 }, { value: r18.value, u: refU('δ18O') }, { value: r17?.value ?? 0, u: r17 ? refU('δ17O') : 0 }]
      const model = (k: 'd18O' | 'd17O') => (x: number[]) => o2DeltasFromMolecular(x[0]!, d33 ? x[1]! : undefined, { d18O: x[2]!, d17O: r17 ? x[3]! : undefined })[k]
      const o18 = propagate(model('d18O'), inputs)
      const o17 = propagate(model('d17O'), inputs)
      w.values['δ18O'] = { value: o18.value, u: o18.u }
      w.values['δ17O'] = { value: o17.value, u: o17.u }
      // Near-unit sensitivities (δ18O ≈ δ34, δ17O ≈ δ33): the reference gas's variance carried as is.
      if (w.refVar?.['δ34'] !== undefined) w.refVar = { ...w.refVar, 'δ18O': w.refVar['δ34']!, 'δ17O': w.refVar['δ33'] ?? 0 }
    }
  }
}

/**
 * Drift from a repeated standard: its δ fitted linearly in time (hours) or position by weighted
 * least squares, and every acquisition corrected to the fit's weighted centroid,
 * δ' = δ − b·(x − x̄) (at the centroid the slope's and intercept's errors are uncorrelated,
 * Bevington & Robinson 2003 §6.4). The slope's error is shared by every acquisition: it is kept
 * as the sensitivity −(x − x̄) with u(b), carried through the normalisation (deltaNormalise.ts)
 * and folded into u there or at the end (GUM 5.2.2).
 */
export function correctDrift(work: DeltaWork[], quantities: string[], model: 'linear-time' | 'linear-position', material: string, stepField: string): DriftFit[] {
  const measured = work.filter(measuredItems)
  const points = measured.filter(w => w.item.material === material && w.item.role !== 'sample')
  const t0 = Math.min(...work.map(w => w.item.acquiredAt))
  const xOf = (w: DeltaWork) => model === 'linear-time' ? (w.item.acquiredAt - t0) / 3_600_000 : w.item.position
  if (new Set(points.map(xOf)).size < 2) {
    throw new EngineError(`${stepField}.material`, 'drift-standard-missing', `the drift standard ${material} must be measured at least twice, at different ${model === 'linear-time' ? 'times' : 'positions'}`)
  }
  return quantities.filter(q => points.every(p => p.values[q])).map((q) => {
    const x = points.map(xOf)
    const fit = weightedLine(x, points.map(p => p.values[q]!.value), points.map(p => p.values[q]!.u))
    const w = points.map(p => 1 / p.values[q]!.u ** 2)
    const xBar = x.reduce((s, v, i) => s + w[i]! * v, 0) / w.reduce((s, v) => s + v, 0)
    for (const item of measured) {
      const v = item.values[q]
      if (!v) continue
      foldDrift(item, q)
      const dx = xOf(item) - xBar
      item.values[q] = { value: v.value - fit.slope * dx, u: item.values[q]!.u }
      item.drift = { ...item.drift, [q]: { sensitivity: -dx, u: fit.uSlope } }
    }
    return { quantity: q, model, slope: { value: fit.slope, u: fit.uSlope }, material }
  })
}
