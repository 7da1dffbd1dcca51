import type { MethodDefinition, MethodStep } from '../../schemas/methods'
import { EngineError } from '../errors'
import { BRAND_2010 } from './isotopologues'
import { VPDB_TO_VSMOW_18O, quantityScales } from './referenceMaterials'
import { bracketReferenceGas, foldDrift, gasRatios, h3Factor, measuredItems, subtractBlank, type DeltaWork } from './deltaSteps'
import { co2ToScale, correctDrift, gasQuantities, moleculesToScale, type ScaleContext } from './deltaScale'
import { addReproducibility, type Reproducibility } from './reproducibility'
import { SHARED_TERMS_SOURCE, addSharedTerms } from './sharedTerms'
import { coverageFactor } from './studentT'
import { NORMALISATION_SOURCE, extrapolationFlags, reducedChi2Limit99, normaliseQuantity, standardResiduals } from './deltaNormalise'
import type { AppliedStep, DriftFit, MaterialValues, Measured, Normalisation, OutcomeFlag, SequenceItem, SequenceOutcome } from './types'

// A δ sequence (CO2, N2, O2, H2) processed under one method: its steps run in the method's
// order, each recorded with its source and the parameters it found. A method that cannot run
// on this sequence is refused with an EngineError naming the method's or the items' field.

type DeltaGas = Exclude<MethodDefinition['gas'], 'Ar'>
/** Where the data stand: beams and ratios, molecular δ against the reference gas, δ on the scale. */
type Stage = 'ratios' | 'molecular' | 'scale' | 'normalised'

const SOURCES: Record<MethodStep['step'], string> = {
  'blank': 'procedural blank, mean of the blanks (GUM JCGM 100:2008 4.2.3); common practice, no source',
  'h3-factor': 'Sessions, Burgoyne & Hayes, Anal. Chem. 73 (2001) 192 and 200 (from memory)',
  'reference-gas': 'Coplen, Rapid Commun. Mass Spectrom. 25 (2011) 2538 (δ against the reference gas)',
  'oxygen-17': BRAND_2010.source,
  'drift': 'weighted least squares (Bevington & Robinson, Data Reduction and Error Analysis, 3rd ed. 2003, §6.4)',
  'normalise': NORMALISATION_SOURCE,
  'time-zero': '',
  'mass-bias': '',
}

export function processDeltaSequence(method: MethodDefinition, items: SequenceItem[], materials: Record<string, MaterialValues>): SequenceOutcome {
  const run = runDeltaSteps(method, items, materials)
  // u² before the shared terms, with and without the reproducibility term: their difference is
  // the part of u² that scales with the estimated s² (the acquisition's own s, and s through the
  // anchors' means and the drift slope), the part with few degrees of freedom.
  const uWith = new Map(run.work.map(w => [w.item.position, Object.fromEntries(Object.entries(w.values).map(([q, v]) => [q, v.u]))]))
  const uWithout = run.reproducibility.some(r => r.s > 0)
    ? new Map(runDeltaSteps(method, items, materials, undefined, undefined, true).work.map(w => [w.item.position, Object.fromEntries(Object.entries(w.values).map(([q, v]) => [q, v.u]))]))
    : undefined
  // Reruns need values only: the CO2 step takes u as the first run found it (same weights).
  const byPosition = new Map(run.work.map(w => [w.item.position, w]))
  const uOf = (w: DeltaWork, q: string) => byPosition.get(w.item.position)?.raw[q]?.u
  const shared = addSharedTerms(run, items, (changed, blankShift) => runDeltaSteps(method, changed, materials, blankShift, uOf))
  const { gas, quantities, scales, work, reproducibility, normalisation, drift, steps, flags } = run
  const residuals = quantities.map(q => standardResiduals(work, q, scales[q]!, materials, method.acceptance.maxStandardResidual, flags))
  const accepted = run.accepted && !flags.some(f => f.code === 'standard-residual')
  // k from the effective degrees of freedom (GUM G.4.1, Welch–Satterthwaite): the
  // reproducibility term is the only component estimated from few replicates; every other is
  // taken as exactly known (ν = ∞). Its share c² of u² is everything s² brought in: the
  // acquisition's own term and s through the anchors' means, the line and the drift slope.
  const scaled = (w: DeltaWork, q: string) => {
    const v = w.values[q]!
    const r = reproducibility.find(x => x.quantity === q)
    const a = uWith.get(w.item.position)?.[q]
    const b = uWithout?.get(w.item.position)?.[q]
    const c2 = r && r.s > 0 && a !== undefined && b !== undefined ? Math.max(0, a * a - b * b) : 0
    if (!r || !(c2 > 0) || !(v.u > 0)) return { ...v, scale: scales[q]!, k: 2 }
    const dof = Math.min(1e6, v.u ** 4 / (c2 ** 2 / r.dof))
    return { ...v, scale: scales[q]!, k: dof >= 1e6 ? 2 : coverageFactor(dof), effectiveDof: dof }
  }
  return {
    gas,
    quantities,
    items: work.map(w => ({
      position: w.item.position,
      role: w.item.role,
      ...(w.item.material ? { material: w.item.material } : {}),
      raw: measuredItems(w) ? w.raw : w.ratios,
      final: Object.fromEntries(quantities.filter(q => w.values[q]).map(q => [q, scaled(w, q)])),
      ...(residuals.some(r => r.has(w)) ? { residual: Object.fromEntries(quantities.flatMap((q, j) => residuals[j]!.has(w) ? [[q, residuals[j]!.get(w)!]] : [])) } : {}),
      flags: w.flags,
    })),
    normalisation,
    drift,
    steps,
    flags,
    accepted,
    ...(shared.length ? { sharedTerms: { source: SHARED_TERMS_SOURCE, terms: shared } } : {}),
  }
}

export interface DeltaRun {
  gas: DeltaGas
  quantities: string[]
  scales: Record<string, string>
  work: DeltaWork[]
  reproducibility: Reproducibility[]
  normalisation: Normalisation[]
  drift: DriftFit[]
  steps: AppliedStep[]
  flags: OutcomeFlag[]
  accepted: boolean
}

/** The method's steps; `blankShift` moves the blank mean, `uOf` asks for values only (shared-term reruns), `noReproducibility` leaves the Type A term out (for its share in u). */
export function runDeltaSteps(method: MethodDefinition, items: SequenceItem[], materials: Record<string, MaterialValues>, blankShift?: Record<string, number>, uOf?: ScaleContext['uOf'], noReproducibility = false): DeltaRun {
  if (method.gas === 'Ar') throw new EngineError('gas', 'not-a-delta-system', 'argon sequences are processed by the mass-bias engine, not as δ values')
  const gas: DeltaGas = method.gas
  if (!items.length) throw new EngineError('items', 'empty', 'the sequence has no acquisitions')
  validateItems(items)
  const ratioKeys = [...gasRatios[gas].required, ...gasRatios[gas].optional]
  const quantities = gasQuantities[gas].filter(q => gas !== 'O2' || q !== 'δ17O' || items.some(i => Object.hasOwn(i.ratios, '33/32') || Object.hasOwn(i.beams, '33')))
  const scales = Object.fromEntries(quantities.map(q => [q, q === 'δ18O' && gas === 'CO2' ? (method.oxygenScale ?? 'VPDB') : quantityScales[q]!]))
  const normaliseIndex = method.steps.findIndex(s => s.step === 'normalise')
  const work: DeltaWork[] = items
    .map((item, index) => ({ item, index, beams: { ...item.beams }, ratios: { ...item.ratios }, values: {}, raw: {}, flags: [] as OutcomeFlag[] }))
    .sort((a, b) => a.item.position - b.item.position)
  const steps: AppliedStep[] = []
  const flags: OutcomeFlag[] = []
  const drift: DriftFit[] = []
  const normalisation: Normalisation[] = []
  let stage = 'ratios' as Stage
  let accepted = true
  // Type A reproducibility, once per quantity: before the drift fit when there is one (so that
  // the slope's u counts it), else before the normalisation, else at the end.
  const reproducibility: Reproducibility[] = []
  const addScatter = (q: string, line?: Parameters<typeof addReproducibility>[2]) => {
    if (noReproducibility || reproducibility.some(r => r.quantity === q) || !work.some(w => measuredItems(w) && w.values[q])) return
    const r = addReproducibility(work, q, line)
    reproducibility.push(r)
    for (const m of r.materials) {
      const limit = reducedChi2Limit99(m.dof)
      if (m.reducedChi2 > limit) flags.push({ code: 'anchor-scatter', message: `${m.material} ${q}: its ${m.n} acquisitions scatter beyond their stated u and the other standards' reproducibility (χ²/ν = ${m.reducedChi2.toFixed(2)} > ${limit.toFixed(2)}, 99 %)` })
    }
    if (r.dof === 0) flags.push({ code: 'reproducibility-unknown', message: `${q}: no standard was measured twice, so run-to-run reproducibility is not in u` })
  }

  const ctx = (): ScaleContext => ({ gas, scales, referenceGas: referenceGasValues(method, quantities, normaliseIndex >= 0), includeReferenceU: normaliseIndex < 0, ...(uOf ? { uOf } : {}) })
  const toScale = () => {
    moleculesToScale(work, ctx())
    for (const w of work.filter(measuredItems)) for (const q of quantities) if (w.values[q]) w.raw[q] = { ...w.values[q]! }
  }

  method.steps.forEach((step, i) => {
    const field = `steps[${i}]`
    const need = (want: Stage[], what: string) => {
      if (stage === 'molecular' && want.includes('scale')) throw new EngineError(field, 'oxygen-17-required', 'CO2 needs the oxygen-17 step after the reference gas: 45/44 holds 12C17O16O as well as 13C16O16O')
      if (!want.includes(stage)) throw new EngineError(`${field}.step`, 'out-of-order', `${step.step} must come ${what}`)
    }
    let parameters: Record<string, unknown>
    switch (step.step) {
      case 'blank':
        need(['ratios'], 'before the reference-gas step (it acts on beams)')
        parameters = subtractBlank(work, ratioKeys, field, blankShift)
        break
      case 'h3-factor':
        if (gas !== 'H2') throw new EngineError(`${field}.step`, 'not-for-gas', `the H3+ factor applies to H2, not ${gas}`)
        need(['ratios'], 'before the reference-gas step')
        parameters = h3Factor(work, field)
        break
      case 'reference-gas':
        need(['ratios'], 'once, before the steps on δ values')
        parameters = bracketReferenceGas(work, ratioKeys, step.bracketing, field)
        stage = 'molecular'
        if (gas !== 'CO2') {
          if (gas === 'H2' && !method.steps.slice(0, i).some(s => s.step === 'h3-factor')) flags.push({ code: 'no-h3-correction', message: 'H2 without the H3+ factor: δ2H carries the H3+ contribution' })
          toScale()
          stage = 'scale'
          parameters = { ...parameters, referenceGas: ctx().referenceGas, molecularToAtomic: gas === 'O2' ? '33R = 2·17R, 34R = 2·18R + 17R²' : gas === 'N2' ? '29R = 2·15R' : '3R = 2·2R' }
        }
        break
      case 'oxygen-17':
        if (gas !== 'CO2') throw new EngineError(`${field}.step`, 'not-for-gas', `the oxygen-17 correction applies to CO2, not ${gas}`)
        need(['molecular'], 'right after the reference-gas step')
        co2ToScale(work, ctx())
        for (const w of work.filter(measuredItems)) for (const q of quantities) w.raw[q] = { ...w.values[q]! }
        stage = 'scale'
        parameters = { set: step.parameters, lambda: BRAND_2010.lambda, K: BRAND_2010.K, R13VPDB: BRAND_2010.r13, R18VPDBCO2: BRAND_2010.r18, R17VPDBCO2: BRAND_2010.r17, referenceGas: ctx().referenceGas, oxygenScale: scales['δ18O'], ...(scales['δ18O'] === 'VSMOW' ? { vpdbToVsmow: VPDB_TO_VSMOW_18O } : {}) }
        break
      case 'drift': {
        need(['scale'], 'after the δ values are on the scale and before the normalisation')
        // Reproducibility first, from every replicated standard about its own mean with one
        // common drift slope (so the slope is neither mistaken for scatter nor its fitted error
        // counted in it); the drift fit then weights its points with it, so u(slope) carries it.
        const t0 = Math.min(...work.map(w => w.item.acquiredAt))
        for (const q of quantities) addScatter(q, { x: w => step.model === 'linear-time' ? (w.item.acquiredAt - t0) / 3_600_000 : w.item.position })
        const fits = correctDrift(work, quantities, step.model, step.material, field)
        drift.push(...fits)
        parameters = { model: step.model, material: step.material, reproducibility: reproducibility.filter(r => quantities.includes(r.quantity)), slopes: Object.fromEntries(fits.map(f => [f.quantity, f.slope])), unit: step.model === 'linear-time' ? '‰ per hour' : '‰ per position' }
        break
      }
      case 'normalise': {
        need(['scale'], 'after the δ values are on the scale, once')
        checkAnchors(step.anchors, method.acceptance.minAnchors, items, materials, field)
        for (const q of quantities) addScatter(q)
        const unanchored: EngineError[] = []
        for (const q of quantities) {
          const before = new Map(work.filter(measuredItems).flatMap(w => w.values[q] ? [[w, w.values[q]!.value] as const] : []))
          let n: Normalisation
          try { n = normaliseQuantity(work, q, scales[q]!, step.anchors, materials, field).normalisation }
          catch (e) {
            if (!(e instanceof EngineError) || e.code !== 'no-anchor-for-quantity') throw e
            // A quantity no anchor states (O2's δ17O) stays on the scale through the reference
            // gas, whose assigned u now counts: flagged, not refused.
            unanchored.push(e)
            const refU = ctx().referenceGas[q]?.u ?? 0
            for (const w of work.filter(measuredItems)) if (w.values[q]) w.values[q] = { value: w.values[q]!.value, u: Math.hypot(w.values[q]!.u, refU) }
            flags.push({ code: 'not-normalised', message: `${q}: no anchor states it; reported through the reference gas's assigned value only` })
            continue
          }
          normalisation.push(n)
          if (new Set(n.anchors.map(a => a.material)).size < method.acceptance.minAnchors) {
            accepted = false
            flags.push({ code: 'too-few-anchors', message: `${q}: ${n.anchors.length} anchor(s) measured, the method needs ${method.acceptance.minAnchors}` })
          }
          if (n.anchors.length === 1) flags.push({ code: 'shift-only', message: `${q}: one anchor, so a shift only; the scale's compression is not corrected` })
          const xs = n.anchors.map(a => a.measuredMean.value)
          extrapolationFlags(work, q, [Math.min(...xs), Math.max(...xs)], before)
        }
        if (unanchored.length === quantities.length) throw unanchored[0]!
        stage = 'normalised'
        parameters = { anchors: step.anchors, fits: normalisation.map(n => ({ quantity: n.quantity, slope: n.slope, intercept: n.intercept, covariance: n.covariance, rmsResidual: n.rmsResidual, ...(n.mswd !== undefined ? { mswd: n.mswd } : {}) })), reproducibility }
        break
      }
      default:
        throw new EngineError(`${field}.step`, 'not-for-delta', `${step.step} belongs to noble-gas methods, not to ${gas} δ values`)
    }
    steps.push({ step: step.step, source: SOURCES[step.step], parameters })
  })
  if (stage === 'molecular') throw new EngineError('steps', 'oxygen-17-required', 'CO2 needs the oxygen-17 step after the reference gas to reach δ13C and δ18O')
  if (stage === 'ratios') throw new EngineError('steps', 'incomplete', 'the method needs a reference-gas step to reach δ values')

  for (const q of quantities) addScatter(q)
  // A drift no normalisation consumed (none ran, or a quantity had no anchor) counts in u now.
  for (const w of work) for (const q of quantities) foldDrift(w, q)
  return { gas, quantities, scales, work, reproducibility, normalisation, drift, steps, flags, accepted }
}

/** The reference gas's δ on the scale; when a normalisation follows, an unknown one may be taken as 0. */
function referenceGasValues(method: MethodDefinition, quantities: string[], normalised: boolean): Record<string, Measured> {
  const out: Record<string, Measured> = {}
  for (const q of quantities) {
    const v = method.referenceGas && Object.hasOwn(method.referenceGas, q) ? method.referenceGas[q] : undefined
    if (v) out[q] = v
    else if (q === 'δ17O') continue
    else if (normalised) out[q] = { value: 0, u: 0 }
    else throw new EngineError(`referenceGas.${q}`, 'required', `without a normalisation the reference gas's ${q} must be given`)
  }
  return out
}

/** The anchors a method names must be known and measured in the sequence, and enough of them. */
function checkAnchors(anchors: string[], minAnchors: number, items: SequenceItem[], materials: Record<string, MaterialValues>, field: string): void {
  const distinct = [...new Set(anchors)]
  if (distinct.length < minAnchors) {
    throw new EngineError(`${field}.anchors`, 'too-few-anchors', `the method names ${distinct.length} anchor(s) but its acceptance needs ${minAnchors}: it cannot anchor the scale`)
  }
  anchors.forEach((id, j) => {
    if (!Object.hasOwn(materials, id)) throw new EngineError(`${field}.anchors[${j}]`, 'unknown-material', `${id} is not a known reference material or working standard`)
    if (!items.some(it => it.material === id && it.role !== 'sample' && it.role !== 'reference-gas' && it.role !== 'blank')) {
      throw new EngineError(`${field}.anchors[${j}]`, 'anchor-not-in-sequence', `the anchor ${id} was not measured in this sequence`)
    }
  })
}

/** Every value finite, every u finite and not negative (ratios: positive), positions unique. */
function validateItems(items: SequenceItem[]): void {
  const seen = new Map<number, number>()
  items.forEach((item, i) => {
    if (!Number.isFinite(item.position)) throw new EngineError(`items[${i}].position`, 'not-finite', 'must be a finite number')
    if (seen.has(item.position)) throw new EngineError(`items[${i}].position`, 'duplicate', `position ${item.position} is also items[${seen.get(item.position)}]`)
    seen.set(item.position, i)
    if (!Number.isFinite(item.acquiredAt)) throw new EngineError(`items[${i}].acquiredAt`, 'not-finite', 'must be a time in ms since the epoch')
    for (const [kind, record] of [['beams', item.beams], ['ratios', item.ratios]] as const) {
      for (const [key, m] of Object.entries(record)) {
        if (!Number.isFinite(m.value)) throw new EngineError(`items[${i}].${kind}.${key}.value`, 'not-finite', 'must be a finite number')
        if (!Number.isFinite(m.u) || m.u < 0 || (kind === 'ratios' && m.u === 0)) throw new EngineError(`items[${i}].${kind}.${key}.u`, 'bad-uncertainty', kind === 'ratios' ? 'a measured ratio needs a positive standard uncertainty' : 'must be a finite number, not negative')
      }
    }
  })
}
