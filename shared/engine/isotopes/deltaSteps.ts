import { EngineError } from '../errors'
import { weightedLine } from './regression'
import type { GasSystem, Measured, OutcomeFlag, SequenceItem } from './types'

// The steps of a δ sequence that act on beams and ratios, before the scale: blank subtraction,
// the H3+ factor and bracketing against the reference gas. Each item's working state lives in
// a DeltaWork; the steps that act on δ values on the scale are in deltaNormalise.ts.

export interface DeltaWork {
  item: SequenceItem
  index: number
  beams: Record<string, Measured>
  ratios: Record<string, Measured>
  /** Quantity (δ45, δ13C, ...) → value and u at the current stage. */
  values: Record<string, Measured>
  raw: Record<string, Measured>
  flags: OutcomeFlag[]
  /** H2 after the H3+ step: the m/z 2 beam and u(K), whose error is carried into δ by bracketing. */
  h3?: { i2: number, uK: number }
  /**
   * After a drift correction, per quantity: ∂δ/∂b (= −(x − x̄)) and u(b). The slope's error is
   * common to every acquisition, so it is carried apart from u and through the normalisation
   * (GUM 5.2, correlated inputs), then folded into u.
   */
  drift?: Record<string, { sensitivity: number, u: number }>
  /**
   * Per quantity: the variance its bracketing reference-gas acquisitions give it. Not in u
   * (a shared term, sharedTerms.ts), but real scatter between standards, so the reproducibility
   * estimate expects it (reproducibility.ts).
   */
  refVar?: Record<string, number>
}

/** Folds a pending drift-slope component into u (when no normalisation consumes it). */
export function foldDrift(w: DeltaWork, quantity: string): void {
  const d = w.drift?.[quantity]
  const v = w.values[quantity]
  if (!d || !v) return
  w.values[quantity] = { value: v.value, u: Math.hypot(v.u, d.sensitivity * d.u) }
  w.drift = withoutKey(w.drift!, quantity)
}

export function withoutKey<T>(record: Record<string, T>, key: string): Record<string, T> {
  return Object.fromEntries(Object.entries(record).filter(([k]) => k !== key))
}

/** The molecular ratios each gas is measured by, the first one required (common practice, no source). */
export const gasRatios: Record<Exclude<GasSystem, 'Ar'>, { required: string[], optional: string[] }> = {
  CO2: { required: ['45/44', '46/44'], optional: [] },
  N2: { required: ['29/28'], optional: [] },
  O2: { required: ['34/32'], optional: ['33/32'] },
  H2: { required: ['3/2'], optional: [] },
}

/** "45/44" → "δ45": the δ of a molecular ratio against the reference gas. */
export const molecularDelta = (ratio: string) => `δ${ratio.split('/')[0]}`

export const measuredItems = (w: DeltaWork) => w.item.role !== 'reference-gas' && w.item.role !== 'blank'

function ratioFromBeams(beams: Record<string, Measured>, key: string): Measured | undefined {
  const [h, l] = key.split('/')
  const hb = Object.hasOwn(beams, h!) ? beams[h!] : undefined
  const lb = Object.hasOwn(beams, l!) ? beams[l!] : undefined
  if (!hb || !lb || !(lb.value > 0)) return undefined
  const r = hb.value / lb.value
  // GUM 5.1.6: relative uncertainties of a quotient add in quadrature (uncorrelated beams).
  return { value: r, u: Math.abs(r) * Math.hypot(hb.u / hb.value, lb.u / lb.value) }
}

function tryRatio(w: DeltaWork, key: string): Measured | undefined {
  return (Object.hasOwn(w.ratios, key) ? w.ratios[key] : undefined) ?? ratioFromBeams(w.beams, key)
}

/** The ratio an item carries for `key`, or one from its beams; missing: a refusal naming the field. */
export function itemRatio(w: DeltaWork, key: string): Measured {
  const r = tryRatio(w, key)
  if (!r) throw new EngineError(`items[${w.index}].ratios.${key}`, 'missing', `position ${w.item.position} has neither the ${key} ratio nor both beams`)
  return r
}

/**
 * Procedural blank: the mean of the sequence's blanks subtracted from every beam, with the
 * mean's Type A standard uncertainty s/√n (GUM 4.2.3; one blank: its own u), then the ratios
 * recomputed from the corrected beams (common practice, no source). The blank mean's error is
 * common to all acquisitions, anchors and samples alike: it is not added to each beam's u (the
 * anchors' means would average it down and the samples count it again) but propagated once as
 * a shared term (sharedTerms.ts moves the mean by its u through `shift`).
 */
export function subtractBlank(work: DeltaWork[], ratioKeys: string[], stepField: string, shift?: Record<string, number>): Record<string, unknown> {
  const blanks = work.filter(w => w.item.role === 'blank')
  if (!blanks.length) throw new EngineError(stepField, 'no-blanks', 'the method subtracts a blank but the sequence has no blank acquisition')
  const masses = new Set(ratioKeys.flatMap(k => k.split('/')))
  const mean: Record<string, Measured> = {}
  for (const mz of masses) {
    const vals = blanks.map(b => Object.hasOwn(b.item.beams, mz) ? b.item.beams[mz]! : { value: 0, u: 0 })
    const n = vals.length
    const avg = vals.reduce((s, v) => s + v.value, 0) / n
    const u = n >= 2 ? Math.sqrt(vals.reduce((s, v) => s + (v.value - avg) ** 2, 0) / (n - 1) / n) : vals[0]!.u
    mean[mz] = { value: avg + (shift?.[mz] ?? 0), u }
  }
  // The reference gas enters by its own inlet and carries no procedural blank.
  for (const w of work.filter(measuredItems)) {
    for (const mz of masses) {
      const b = Object.hasOwn(w.beams, mz) ? w.beams[mz] : undefined
      if (!b) throw new EngineError(`items[${w.index}].beams.${mz}`, 'missing', `blank subtraction needs the m/z ${mz} beam of position ${w.item.position}`)
      w.beams[mz] = { value: b.value - mean[mz]!.value, u: b.u }
    }
    const light = ratioKeys[0]!.split('/')[1]!
    if (!(w.beams[light]!.value > 0)) throw new EngineError(`items[${w.index}].beams.${light}`, 'below-blank', `position ${w.item.position}: the m/z ${light} beam is no larger than the blank`)
    w.ratios = {}
    for (const key of ratioKeys) {
      const r = ratioFromBeams(w.beams, key)
      if (r) w.ratios[key] = r
    }
  }
  return { blanks: blanks.map(b => b.item.position), mean }
}

/**
 * H3+ factor: H3+ forms in the source in proportion to [H2+]², so the measured 3/2 ratio grows
 * linearly with the m/z 2 beam, R_meas = R_true + K·i2 (Sessions, Burgoyne & Hayes, Anal. Chem.
 * 73 (2001) 192 and 200, the correction and the determination of K; from memory). K is the
 * slope of the reference-gas acquisitions' 3/2 against i2 (weighted least squares); every
 * acquisition's ratio is then R − K·i2. R − K·i2 on whole-acquisition means is right only for
 * steady signals (dual-inlet style mean currents): a transient peak's H3+ grows with i2² point
 * by point, so its integral is not K·(mean i2)·(area), and Sessions et al. correct such peaks
 * point by point. Items whose beams are peak areas are therefore refused, not corrected.
 */
export function h3Factor(work: DeltaWork[], stepField: string): Record<string, unknown> {
  const swept = work.find(w => w.item.role !== 'blank' && w.item.beamKind === 'peak-area')
  if (swept) throw new EngineError(`items[${swept.index}].beamKind`, 'not-steady-signal', `position ${swept.item.position} has swept peak areas: the H3+ factor needs steady mean beam currents in amperes (dual-inlet style); a transient peak must be corrected point by point before it is posted`)
  const refs = work.filter(w => w.item.role === 'reference-gas')
  const i2 = (w: DeltaWork) => {
    const b = Object.hasOwn(w.beams, '2') ? w.beams['2'] : undefined
    if (!b) throw new EngineError(`items[${w.index}].beams.2`, 'missing', `the H3+ factor needs the m/z 2 beam of position ${w.item.position}`)
    return b
  }
  if (refs.length < 2) throw new EngineError(stepField, 'too-few-reference-gas', 'the H3+ factor needs at least two reference-gas acquisitions of different intensity')
  const x = refs.map(w => i2(w).value)
  let fit
  try { fit = weightedLine(x, refs.map(w => itemRatio(w, '3/2').value), refs.map(w => itemRatio(w, '3/2').u)) }
  catch (e) {
    if (e instanceof EngineError && e.code === 'degenerate') throw new EngineError(stepField, 'same-intensity', 'the reference-gas acquisitions all have one m/z 2 intensity: the H3+ factor needs several')
    throw e
  }
  for (const w of work.filter(x => x.item.role !== 'blank')) {
    const r = itemRatio(w, '3/2')
    const b = i2(w)
    // u(K) is not added here: K is fitted on the reference-gas acquisitions, whose errors are
    // propagated once as shared terms (sharedTerms.ts), K refitted each time (GUM 5.2).
    w.ratios['3/2'] = { value: r.value - fit.slope * b.value, u: Math.hypot(r.u, fit.slope * b.u) }
    w.h3 = { i2: b.value, uK: fit.uSlope }
  }
  return { K: { value: fit.slope, u: fit.uSlope }, unit: '1/A', referenceGas: refs.map(r => r.item.position), chi2: fit.chi2 }
}

/**
 * δ of each measured acquisition's ratios against the reference gas bracketing it
 * (the reference gas's own errors are shared terms, not in this u):
 * δ = (R_sample / R_ref − 1)·1000 ‰ (McKinney et al., Rev. Sci. Instrum. 21 (1950) 724, the
 * δ notation; Coplen, Rapid Commun. Mass Spectrom. 25 (2011) 2538). R_ref is the nearest
 * reference-gas acquisition by position, or the mean of the nearest before and after.
 */
export function bracketReferenceGas(work: DeltaWork[], ratioKeys: string[], mode: 'nearest' | 'neighbours-mean', stepField: string): Record<string, unknown> {
  const refs = work.filter(w => w.item.role === 'reference-gas')
  if (!refs.length) throw new EngineError(stepField, 'no-reference-gas', 'the sequence has no reference-gas acquisition to bracket against')
  const used: Record<number, number[]> = {}
  for (const w of work.filter(measuredItems)) {
    const p = w.item.position
    const before = refs.filter(r => r.item.position < p).at(-1)
    const after = refs.find(r => r.item.position > p)
    let chosen: DeltaWork[]
    if (mode === 'nearest') {
      const candidates = [before, after].filter((r): r is DeltaWork => !!r)
      chosen = [candidates.sort((a, b) => Math.abs(a.item.position - p) - Math.abs(b.item.position - p))[0]!]
    }
    else chosen = [before, after].filter((r): r is DeltaWork => !!r)
    used[p] = chosen.map(r => r.item.position)
    for (const key of ratioKeys) {
      // An optional ratio (O2's 33/32) is used only where the sample and its references have it.
      const optional = gasOptional(key)
      const rs = optional ? tryRatio(w, key) : itemRatio(w, key)
      const refRatios = chosen.map(r => optional ? tryRatio(r, key) : itemRatio(r, key))
      if (!rs || refRatios.some(r => !r)) continue
      const rr = refRatios.reduce((s, r) => s + r!.value, 0) / refRatios.length
      const d = (rs.value / rr - 1) * 1000
      // Only the acquisition's own ratio: each reference-gas acquisition brackets several
      // acquisitions (anchors and samples), so its error is a shared term (sharedTerms.ts).
      const u = 1000 * (rs.value / rr) * (rs.u / rs.value)
      const urr = Math.sqrt(refRatios.reduce((s, r) => s + r!.u ** 2, 0)) / refRatios.length
      w.refVar = { ...w.refVar, [molecularDelta(key)]: (1000 * (rs.value / rr) * (urr / rr)) ** 2 }
      w.values[molecularDelta(key)] = { value: d, u }
      w.raw[molecularDelta(key)] = { value: d, u }
    }
  }
  return { bracketing: mode, referenceGasUsed: used }
}

const gasOptional = (key: string) => key === '33/32'
