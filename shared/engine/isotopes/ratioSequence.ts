import type { MethodDefinition, MethodStep } from '../../schemas/methods'
import { EngineError } from '../errors'
import { BLANK_SOURCE, blankLevels } from './blank'
import { correctRatio, cycleRatioCorrelation, isotopeRatio, MASS_BIAS_SOURCES, sharedDenominatorCovariance, type IsotopeRatio } from './massBias'
import { massBiasFactors } from './massBiasReference'
import { coverageFactor } from './studentT'
import { correctedRatioDof, DOF_SOURCE, welchSatterthwaite, type BeamSource } from './ratioDof'
import { TIME_ZERO_SOURCE, timeZeroIntercept, type TimeZeroModel } from './timeZero'
import type { AppliedStep, MaterialValues, Measured, OutcomeFlag, OutcomeItem, ScaledValue, SequenceItem, SequenceOutcome } from './types'

// A noble-gas ratio sequence (argon): the method's beam-level steps in their order (procedural
// blank, time-zero regression), then the mass-bias correction by a law against an air standard
// measured in the sequence or against an internal ratio of known value. Each step is recorded
// with its source and parameters; every value carries its standard uncertainty (GUM, JCGM
// 100:2008) and k = t₉₅(ν_eff) (ratioDof.ts), or k = 2 where the ratios came as stated.

/** The quantities of an argon sequence and the nominal-mass ratios they come from. */
export const ARGON_QUANTITIES: Record<string, string> = { '40Ar/36Ar': '40/36', '38Ar/36Ar': '38/36' }
/** Internal normalisation on 38/36 assumes atmospheric 38/36 (McDougall & Harrison 1999, from memory). */
const INTERNAL_38_36_NOTE = 'internal normalisation on 38/36 assumes the sample\'s 38Ar/36Ar is atmospheric: invalid for neutron-irradiated samples, whose 38Ar grows from 37Cl(n,γ)38Cl → 38Ar (McDougall & Harrison, Geochronology and Thermochronology by the 40Ar/39Ar Method, 2nd ed., 1999, from memory)'
const ARGON_STEPS = new Set<MethodStep['step']>(['blank', 'time-zero', 'mass-bias'])

interface ItemState {
  item: SequenceItem
  index: number
  /** Beams after the beam-level steps; null while no beam-level step has run. */
  beams: Record<string, Measured> | null
  cycles: { t: number, beams: Record<string, number> }[] | undefined
  /** Degrees of freedom of each processed beam's u (time-zero fit, blank); absent: unknown. */
  dof: Record<string, number>
  /** Variance (and its degrees of freedom) of a blank already taken off the cycles, added to the time-zero intercept's. */
  pendingVar: Record<string, number>
  pendingDof: Record<string, number>
  flags: OutcomeFlag[]
}

const quantityOf = (key: string) => Object.keys(ARGON_QUANTITIES).find(q => ARGON_QUANTITIES[q] === key) ?? key

/** Processes an argon sequence under `method`; throws EngineError when the method cannot run on it. */
export function processRatioSequence(method: MethodDefinition, items: SequenceItem[], materials: readonly MaterialValues[]): SequenceOutcome {
  if (method.gas !== 'Ar') throw new EngineError('method.gas', 'gas-not-supported', `the ratio engine handles argon; ${method.gas} is a δ system`)
  if (items.length === 0) throw new EngineError('items', 'empty', 'the sequence has no acquisitions')
  method.steps.forEach((s, i) => {
    if (!ARGON_STEPS.has(s.step)) throw new EngineError(`method.steps[${i}].step`, 'step-not-applicable', `"${s.step}" is a step of the δ systems and does not apply to argon`)
    if (method.steps.findIndex(o => o.step === s.step) !== i) throw new EngineError(`method.steps[${i}].step`, 'duplicate-step', `"${s.step}" appears twice`)
    if (s.step !== 'mass-bias' && method.steps.slice(0, i).some(o => o.step === 'mass-bias')) {
      throw new EngineError(`method.steps[${i}].step`, 'step-order', `"${s.step}" acts on beams and must come before the mass-bias correction`)
    }
  })
  /** The time-zero model of a later step: a blank before it is taken off the cycles at its inlet value. */
  const timeZeroLater = (i: number) => {
    const later = method.steps.slice(i + 1).find(s => s.step === 'time-zero')
    return later?.step === 'time-zero' ? later.model : null
  }
  const states: ItemState[] = items.map((item, index) => ({ item, index, beams: null, cycles: item.cycles?.map(c => ({ t: c.t, beams: { ...c.beams } })), dof: {}, pendingVar: {}, pendingDof: {}, flags: [] }))
  const steps: AppliedStep[] = []
  const flags: OutcomeFlag[] = []
  let massBias: Extract<MethodStep, { step: 'mass-bias' }> | undefined
  let massBiasIndex = -1

  method.steps.forEach((step, i) => {
    if (step.step === 'blank') steps.push(applyBlank(states, flags, timeZeroLater(i)))
    else if (step.step === 'time-zero') steps.push(applyTimeZero(states, step.model))
    else if (step.step === 'mass-bias') { massBias = step; massBiasIndex = i }
  })

  const keys = Object.values(ARGON_QUANTITIES)
  const measured = states.map(s => (s.item.role === 'blank' ? null : measuredRatios(s, keys)))
  const beamSource = (s: ItemState): BeamSource | null => (s.beams ? { beams: s.beams, dof: s.dof } : null)
  const coverage: { position: number, quantity: string, dof: number | null, k: number }[] = []
  const record = (i: number, key: string, dof: number) => {
    const k = Number.isFinite(dof) ? coverageFactor(dof) : 2
    coverage.push({ position: states[i]!.item.position, quantity: quantityOf(key), dof: Number.isFinite(dof) ? dof : null, k })
    return k
  }
  /**
   * Stated ratios (means over cycles): each with n − 1 degrees of freedom of its cycles (GUM 4.2.3);
   * internal normalisation's correlated pair as one component, the measured part of the total u.
   */
  const statedK = (i: number, key: string, refKey: string, e: number, sources: { index: number, weight: number }[], acceptedRelU: number, totalRelU: number) => {
    const dofOf = (j: number) => (states[j]!.beams === null && (states[j]!.item.cycles?.length ?? 0) >= 2 ? states[j]!.item.cycles!.length - 1 : null)
    if ([i, ...sources.map(s => s.index)].some(j => dofOf(j) === null)) return 2
    const accepted = { relU: Math.abs(e) * acceptedRelU, dof: Number.POSITIVE_INFINITY }
    const self = sources.length === 1 && sources[0]!.index === i
    const rel = (j: number, k: string) => measured[j]!.ratios[k]!.u / measured[j]!.ratios[k]!.value
    const parts = self
      ? [{ relU: Math.sqrt(Math.max(totalRelU ** 2 - accepted.relU ** 2, 0)), dof: dofOf(i)! }]
      : [{ relU: rel(i, key), dof: dofOf(i)! }, ...sources.map(s => ({ relU: Math.abs(e * s.weight) * rel(s.index, refKey), dof: dofOf(s.index)! }))]
    return record(i, key, welchSatterthwaite([...parts, accepted]))
  }
  /** k from ν_eff of the beams (GUM G.4.1), of the stated ratios' cycles, or 2 where neither is known. */
  const kOf = (i: number, key: string, refKey: string, e: number, sources: { index: number, weight: number }[], acceptedRelU: number, totalRelU: number) => {
    const own = beamSource(states[i]!)
    const src = sources.map(s => ({ beams: beamSource(states[s.index]!), weight: s.weight }))
    if (!own) return statedK(i, key, refKey, e, sources, acceptedRelU, totalRelU)
    if (src.some(s => !s.beams)) return 2
    return record(i, key, correctedRatioDof(own, key, refKey, e, src as { beams: BeamSource, weight: number }[], acceptedRelU).dof)
  }
  const finals: (Record<string, ScaledValue> | null)[] = measured.map((m, i) => (m
    ? Object.fromEntries(Object.entries(m.ratios).map(([k, r]) => [quantityOf(k), { ...r, scale: 'measured, not corrected for mass bias', k: kOf(i, k, k, 0, [], 0, r.u / r.value) }]))
    : null))
  if (massBias) {
    const mb = massBias
    const field = `method.steps[${massBiasIndex}]`
    const refKey = mb.ratio ?? (mb.against === 'standard' ? '40/36' : undefined)
    if (!refKey) throw new EngineError(`${field}.ratio`, 'required', 'internal normalisation needs the ratio of known value, e.g. "38/36"')
    const ref = isotopeRatio(refKey, 'Ar', `${field}.ratio`)
    const materialId = mb.material ?? 'AIR-Ar'
    const material = materials.find(m => m.id === materialId)
    if (!material) throw new EngineError(`${field}.material`, 'unknown-material', `no values for material "${materialId}"`)
    const known = material.values[quantityOf(refKey)]
    if (!known) throw new EngineError(`${field}.material`, 'no-reference-value', `material "${materialId}" has no value for ${quantityOf(refKey)}`)
    const factors = massBiasFactors(mb, states.map(s => s.item), measured.map(m => m?.ratios[refKey] ?? null), known, ref, field)
    const targets = keys.filter(k => mb.against === 'standard' || k !== refKey).map(k => [k, isotopeRatio(k, 'Ar')] as [string, IsotopeRatio])
    const scale = mb.against === 'standard'
      ? `mass-bias corrected (${mb.law} law), referenced to ${material.name}`
      : `mass-bias corrected (${mb.law} law), internally normalised to ${quantityOf(refKey)} = ${known.value}`
    states.forEach((s, i) => {
      const m = measured[i]
      if (!m) return
      const f = factors.perItem[i]!
      finals[i] = Object.fromEntries(targets.map(([k, target]) => {
        const c = correctRatio({
          law: mb.law, measured: m.ratios[k]!, target,
          referenceMeasured: { value: known.value / f.x, u: (known.value / f.x) * f.uRelMeasured }, referenceKnown: known, ref,
          relativeCovariance: f.selfWeight * (k === refKey ? (m.ratios[k]!.u / m.ratios[k]!.value) ** 2 : m.cov(k, refKey)),
        })
        return [quantityOf(k), { value: c.value, u: c.u, scale, k: kOf(i, k, refKey, c.sensitivity, f.sources, known.u / known.value, c.u / c.value) }]
      }))
      s.flags.push(...f.flags)
    })
    steps.push({
      step: 'mass-bias',
      source: MASS_BIAS_SOURCES[mb.law],
      parameters: {
        law: mb.law, against: mb.against, material: material.id, materialSource: material.source, ratio: refKey,
        referenceValue: known, masses: { [ref.numerator]: ref.mNum, [ref.denominator]: ref.mDen, ...Object.fromEntries(targets.map(([, t]) => [t.numerator, t.mNum])) },
        massSource: 'AME2020 atomic masses (Wang et al., Chin. Phys. C 45 (2021) 030003) through chemical-elements',
        ...factors.parameters,
        covarianceBasis: [...new Set(measured.filter(m => m !== null).map(m => m.covarianceBasis))],
        ...(mb.against === 'internal' && refKey === '38/36' ? { methodNote: INTERNAL_38_36_NOTE } : {}),
      },
    })
  }
  // Recorded with the last step: how each final value's k was found (not a correction of its own).
  const last = steps.at(-1)
  if (last && coverage.length > 0) last.parameters.coverage = { source: DOF_SOURCE, rule: 'k = t_p(ν_eff) at p = 95.45 % by Welch–Satterthwaite over the beams, or over stated ratios with n − 1 degrees of freedom of their cycles; k = 2 where neither is known', perItem: coverage }
  const outcomeItems = states.map((s, i) => outcomeItem(s, measured[i]?.ratios ?? null, finals[i] ?? null, materials, method, flags))
  const quantities = massBias?.against === 'internal' ? Object.keys(ARGON_QUANTITIES).filter(q => ARGON_QUANTITIES[q] !== massBias!.ratio) : Object.keys(ARGON_QUANTITIES)
  return { gas: 'Ar', quantities, items: outcomeItems, normalisation: [], drift: [], steps, flags, accepted: !flags.some(f => f.code === 'standard-residual-exceeds') }
}


function applyBlank(states: ItemState[], flags: OutcomeFlag[], timeZeroModel: TimeZeroModel | null): AppliedStep {
  const beforeTimeZero = timeZeroModel !== null
  const blanks = states.filter(s => s.item.role === 'blank')
  if (blanks.length === 0) throw new EngineError('items', 'no-blank', 'the method subtracts a procedural blank but the sequence has no blank acquisition')
  // Before time zero the blank comes off every sample cycle, so it must be the blank's value at the inlet:
  // each blank is regressed to t = 0 with the later step's model first. Its mean over its cycles would carry
  // its ingrowth g·t̄, over-subtracted from every cycle and so from the sample's intercept.
  const atInlet = timeZeroModel ? blanks.map(s => blankAtInlet(s, timeZeroModel)) : null
  const levels = blankLevels(
    atInlet ? atInlet.map(b => b.beams) : blanks.map(s => s.beams ?? s.item.beams),
    atInlet ? atInlet.map(b => b.dof) : blanks.map(s => s.dof),
  )
  if (blanks.length === 1) flags.push({ code: 'single-blank', message: 'one blank acquisition: its own uncertainty stands for the blank\'s scatter' })
  for (const s of states) {
    if (s.item.role === 'blank') continue
    for (const [beam, level] of Object.entries(levels)) {
      if (beforeTimeZero && s.cycles) {
        // Taken off every cycle now, so the time-zero intercept is the blank-corrected signal; its u joins the intercept's.
        for (const c of s.cycles) if (Object.hasOwn(c.beams, beam)) c.beams[beam]! -= level.value
        s.pendingVar[beam] = (s.pendingVar[beam] ?? 0) + level.u ** 2
        s.pendingDof[beam] = level.dof
        continue
      }
      s.beams ??= { ...s.item.beams }
      const b = s.beams[beam]
      if (!b) continue
      s.beams[beam] = { value: b.value - level.value, u: Math.hypot(b.u, level.u) }
      s.dof[beam] = welchSatterthwaite([{ relU: b.u, dof: s.dof[beam] ?? Number.POSITIVE_INFINITY }, { relU: level.u, dof: level.dof }])
    }
  }
  return {
    step: 'blank', source: BLANK_SOURCE,
    parameters: { blanks: blanks.map(s => s.item.position), levels, unit: 'A', appliedTo: beforeTimeZero ? `cycles (each blank regressed to t = 0, ${timeZeroModel} model, first)` : 'beams' },
  }
}

/** A blank's beams at the inlet time, each with the u (and n − 2 degrees of freedom) of its own time-zero fit. */
function blankAtInlet(s: ItemState, model: TimeZeroModel): { beams: Record<string, Measured>, dof: Record<string, number> } {
  const cycles = s.cycles
  if (!cycles || cycles.length === 0) throw new EngineError(`items[${s.index}].cycles`, 'missing-cycles', 'the blank is taken off the cycles before the time-zero regression, so each blank needs its cycle readings')
  const out = { beams: {} as Record<string, Measured>, dof: {} as Record<string, number> }
  for (const beam of Object.keys(cycles[0]!.beams)) {
    const fit = timeZeroIntercept(cycles.map(c => c.t), cycles.map(c => c.beams[beam] ?? Number.NaN), model, `items[${s.index}].cycles.${beam}`)
    out.beams[beam] = fit.intercept
    out.dof[beam] = fit.dof
  }
  return out
}

function applyTimeZero(states: ItemState[], model: 'linear' | 'exponential'): AppliedStep {
  const fits: Record<string, unknown>[] = []
  for (const s of states) {
    const cycles = s.cycles
    if (!cycles || cycles.length === 0) throw new EngineError(`items[${s.index}].cycles`, 'missing-cycles', 'the method regresses to time zero but this acquisition has no cycle readings')
    const beams: Record<string, Measured> = { ...(s.beams ?? {}) }
    for (const beam of Object.keys(cycles[0]!.beams)) {
      const fit = timeZeroIntercept(cycles.map(c => c.t), cycles.map(c => c.beams[beam] ?? Number.NaN), model, `items[${s.index}].cycles.${beam}`)
      beams[beam] = { value: fit.intercept.value, u: Math.sqrt(fit.intercept.u ** 2 + (s.pendingVar[beam] ?? 0)) }
      s.dof[beam] = welchSatterthwaite([{ relU: fit.intercept.u, dof: fit.dof }, { relU: Math.sqrt(s.pendingVar[beam] ?? 0), dof: s.pendingDof[beam] ?? Number.POSITIVE_INFINITY }])
      for (const code of fit.flags) s.flags.push({ code, message: `beam ${beam}: ${code.replaceAll('-', ' ')}`, position: s.item.position })
      fits.push({ position: s.item.position, beam, model: fit.model, intercept: fit.intercept, rate: fit.rate, cycles: fit.cycles, dof: fit.dof, k95: fit.k95, flags: fit.flags })
    }
    s.pendingVar = {}
    s.beams = beams
  }
  return { step: 'time-zero', source: TIME_ZERO_SOURCE, parameters: { model, fits } }
}

interface MeasuredRatios { ratios: Record<string, Measured>, cov: (a: string, b: string) => number, covarianceBasis: string }

/**
 * The ratios entering the mass-bias step: from the processed beams, or as the item stated them.
 * Null, with a flag on the item, when a ratio is not positive (a beam at or under its blank):
 * the acquisition stays in the outcome without a corrected value rather than stopping the sequence.
 */
function measuredRatios(s: ItemState, keys: string[]): MeasuredRatios | null {
  const ratios: Record<string, Measured> = {}
  const beams = s.beams ?? s.item.beams
  for (const key of keys) {
    const [n, d] = key.split('/') as [string, string]
    const stated = s.beams ? undefined : (Object.hasOwn(s.item.ratios, key) ? s.item.ratios[key] : undefined)
    if (stated) {
      if (!Number.isFinite(stated.value) || !(stated.u >= 0)) throw new EngineError(`items[${s.index}].ratios.${key}`, 'not-finite', 'needs a finite value and a non-negative u')
      ratios[key] = stated
    }
    else {
      // From the processed beams, or from the stated beams when the acquisition gave no such ratio.
      const bn = Object.hasOwn(beams, n) ? beams[n] : undefined
      const bd = Object.hasOwn(beams, d) ? beams[d] : undefined
      if (!bn || !bd) throw new EngineError(`items[${s.index}].${s.beams ? 'cycles' : 'ratios'}.${key}`, 'missing-ratio', `the acquisition has neither a ${key} ratio nor beams ${n} and ${d}`)
      const value = bn.value / bd.value
      ratios[key] = { value, u: Math.abs(value) * Math.hypot(bn.u / bn.value, bd.u / bd.value) }
    }
    if (!(ratios[key].value > 0) || !Number.isFinite(ratios[key].u)) {
      s.flags.push({ code: 'ratio-not-positive', message: `${key} is ${ratios[key].value.toPrecision(4)}: no mass-bias correction (a beam at or below its blank?)`, position: s.item.position })
      return null
    }
  }
  const rel = (k: string) => ratios[k]!.u / ratios[k]!.value
  // Stated ratios (means over static cycles): their covariance from the cycles' own ratios, r·u_rel(a)·u_rel(b)
  // (GUM 5.2.3, eq. 17). Without cycles, the shared denominator's u_rel²(d) only where it cannot exceed
  // either ratio's own u_rel²; otherwise left out, which overstates u (the term enters with a minus sign
  // for positive e) rather than understating it. Ratios from processed beams: u_rel²(d) (GUM 5.2.2).
  const stated = s.beams === null
  const cov = (a: string, b: string) => {
    const r = stated && s.item.cycles ? cycleRatioCorrelation(a, b, s.item.cycles) : null
    if (r !== null) return r * rel(a) * rel(b)
    const c = sharedDenominatorCovariance(a, b, beams)
    return !stated || c <= Math.min(rel(a) ** 2, rel(b) ** 2) ? c : 0
  }
  const covarianceBasis = !stated ? 'shared denominator beam' : s.item.cycles ? 'cycles (GUM 5.2.3)' : 'denominator beam, capped'
  return { ratios, cov, covarianceBasis }
}

function outcomeItem(s: ItemState, raw: Record<string, Measured> | null, final: Record<string, ScaledValue> | null, materials: readonly MaterialValues[], method: MethodDefinition, flags: OutcomeFlag[]): OutcomeItem {
  const { item } = s
  const out: OutcomeItem = {
    position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}),
    raw: raw ? Object.fromEntries(Object.entries(raw).map(([k, v]) => [quantityOf(k), v])) : {},
    final: final ?? {},
    flags: s.flags,
  }
  const material = item.material && item.role !== 'sample' && item.role !== 'blank' ? materials.find(m => m.id === item.material) : undefined
  if (material && final) {
    out.residual = {}
    for (const [q, v] of Object.entries(final)) {
      const accepted = material.values[q]
      if (!accepted) continue
      out.residual[q] = v.value - accepted.value
      const relPermil = Math.abs(out.residual[q] / accepted.value) * 1000
      const max = method.acceptance?.maxStandardResidual
      if (max !== undefined && relPermil > max) {
        const flag = { code: 'standard-residual-exceeds', message: `${q} of ${material.id} is ${relPermil.toFixed(2)} ‰ from its accepted value (limit ${max} ‰)`, position: item.position }
        out.flags.push(flag)
        flags.push(flag)
      }
    }
  }
  return out
}
