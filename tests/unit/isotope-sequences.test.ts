import { describe, expect, it } from 'vitest'
import { EngineError, inflateByMswd, processDeltaSequence, referenceMaterials, type SequenceOutcome } from '../../shared/engine'
import type { MethodDefinition } from '../../shared/schemas/methods'
import { buildSequence, caseMethod, cases, type Built } from '../support/deltaSequences'

// δ sequences simulated from first principles (shared/engine/isotopes/simulateSequence.ts) with
// the instrument's memory (scale compression), sample-path fractionation (offset) and its drift,
// then processed by the engine: the samples' true δ must come back.

function worstError(out: SequenceOutcome, built: Built): number {
  let worst = 0
  for (const s of built.samples) {
    const item = out.items.find(i => i.position === s.position)!
    for (const [q, truth] of Object.entries(s.truth)) worst = Math.max(worst, Math.abs(item.final[q]!.value - truth))
  }
  return worst
}

function refusal(fn: () => unknown): EngineError {
  try { fn() }
  catch (e) { if (e instanceof EngineError) return e; throw e }
  throw new Error('expected an EngineError')
}

describe('normalised sample δ recovered within 0.05 ‰ (noise off, standards at their accepted values)', () => {
  it.each(['CO2', 'N2', 'O2', 'H2'])('%s, with memory, fractionation and drift', (gas) => {
    const c = cases[gas]!
    const built = buildSequence(c, 3, { noise: false, drawStandards: false })
    const out = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    expect(worstError(out, built)).toBeLessThan(0.05)
    // The instrument compresses the scale (memory 1.5 %): the fitted slope shows it.
    expect(out.normalisation[0]!.slope.value).toBeGreaterThan(1.01)
    expect(out.steps.map(s => s.step)).toEqual(caseMethod(c).steps.map(s => s.step))
    expect(out.steps.every(s => s.source.length > 10)).toBe(true)
    // O2's δ17O: no reference material states it, so it is reported through the reference gas, flagged.
    if (gas === 'O2') expect(out.flags.map(f => f.code)).toContain('not-normalised')
  })

  it('CO2 with δ18O on VSMOW (Brand et al. 2014 conversion) and a procedural blank subtracted', () => {
    const c = { ...cases.CO2!, oxygenScale: 'VSMOW' as const, samples: [{ 'δ13C': -25.3, 'δ18O': 22.6 }, { 'δ13C': -12.0, 'δ18O': 15.0 }], referenceGas: { 'δ13C': -36.2, 'δ18O': 18.0 } }
    const built = buildSequence(c, 4, { noise: false, drawStandards: false, blanks: true })
    const method = caseMethod(c)
    const withBlank = processDeltaSequence({ ...method, steps: [{ step: 'blank' }, ...method.steps] }, built.items, referenceMaterials)
    expect(withBlank.items.find(i => i.position === built.samples[0]!.position)!.final['δ18O']!.scale).toBe('VSMOW')
    expect(worstError(withBlank, built)).toBeLessThan(0.05)
    expect(withBlank.steps[0]!.parameters.blanks).toHaveLength(3)
  })

  it('the 17O correction matters: δ45 read as δ13C against the reference gas misses by more than 0.05 ‰', () => {
    const c = cases.CO2!
    const built = buildSequence(c, 3, { noise: false, drawStandards: false })
    const out = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    const sample = out.items.find(i => i.position === built.samples[1]!.position)!
    expect(Math.abs(sample.raw['δ45']!.value - sample.raw['δ13C']!.value)).toBeGreaterThan(0.05)
  })

  it('H2: the H3+ factor is found from reference-gas acquisitions of different intensity', () => {
    const c = cases.H2!
    const built = buildSequence(c, 5, { noise: false, drawStandards: false })
    const out = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    const K = out.steps[0]!.parameters.K as { value: number }
    expect(K.value / c.instrument!.h3FactorPerA!).toBeCloseTo(1, 9)
    const without = processDeltaSequence(caseMethod(c, {}, caseMethod(c).steps.slice(1)), built.items, referenceMaterials)
    expect(without.flags.map(f => f.code)).toContain('no-h3-correction')
    expect(worstError(without, built)).toBeGreaterThan(0.05)
  })
})

describe('drift', () => {
  it('on: without the drift step the samples miss, with it they are recovered', () => {
    const c = cases.N2!
    const built = buildSequence(c, 6, { noise: false, drawStandards: false, instrument: { driftPermilPerUPerHour: 0.05 } })
    const steps = caseMethod(c).steps
    const without = processDeltaSequence(caseMethod(c, {}, steps.filter(s => s.step !== 'drift')), built.items, referenceMaterials)
    const withDrift = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    expect(worstError(without, built)).toBeGreaterThan(0.05)
    expect(worstError(withDrift, built)).toBeLessThan(0.05)
    expect(withDrift.drift[0]!.slope.value).toBeGreaterThan(0.04)
  })

  it('off: an instrument that does not drift gives a slope within 3 u of zero', () => {
    const c = cases.N2!
    const built = buildSequence(c, 7, { instrument: { driftPermilPerUPerHour: 0 } })
    const out = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    expect(Math.abs(out.drift[0]!.slope.value)).toBeLessThan(3 * out.drift[0]!.slope.u)
  })

  it('by position works as by time when acquisitions are evenly spaced', () => {
    const c = cases.N2!
    const built = buildSequence(c, 8, { noise: false, drawStandards: false })
    const m = caseMethod(c)
    const byPosition = processDeltaSequence({ ...m, steps: m.steps.map(s => s.step === 'drift' ? { ...s, model: 'linear-position' as const } : s) }, built.items, referenceMaterials)
    expect(worstError(byPosition, built)).toBeLessThan(0.05)
    expect(byPosition.drift[0]!.model).toBe('linear-position')
  })
})

describe('anchors and acceptance', () => {
  it('one anchor: a shift only (slope 1 exactly), right at the anchor and wrong far from it when the scale is compressed', () => {
    const c = { ...cases.N2!, anchors: ['USGS40'] }
    const built = buildSequence(c, 9, { noise: false, drawStandards: false })
    const out = processDeltaSequence(caseMethod(c, { acceptance: { minAnchors: 1 } }), built.items, referenceMaterials)
    expect(out.normalisation[0]!.slope).toEqual({ value: 1, u: 0 })
    expect(out.accepted).toBe(true)
    const near = out.items.find(i => i.position === built.samples[1]!.position)!
    const far = out.items.find(i => i.position === built.samples[2]!.position)!
    expect(Math.abs(near.final['δ15N']!.value - -2.2)).toBeLessThan(0.05)
    expect(Math.abs(far.final['δ15N']!.value - 31.7)).toBeGreaterThan(0.3)
    expect(out.flags.map(f => f.code)).toContain('shift-only')
  })

  it('a method that cannot anchor the scale: one anchor named, two required', () => {
    const c = { ...cases.N2!, anchors: ['USGS40'] }
    const built = buildSequence(c, 9)
    const e = refusal(() => processDeltaSequence(caseMethod(c, { acceptance: { minAnchors: 2 } }), built.items, referenceMaterials))
    expect([e.field, e.code]).toEqual(['steps[2].anchors', 'too-few-anchors'])
  })

  it('an anchor missing from the sequence, and an unknown one, are refused by their field', () => {
    const c = cases.N2!
    const built = buildSequence(c, 10)
    const missing = refusal(() => processDeltaSequence(caseMethod(c, {}, [{ step: 'reference-gas', bracketing: 'nearest' }, { step: 'normalise', anchors: ['USGS40', 'USGS25'] }]), built.items, referenceMaterials))
    expect([missing.field, missing.code]).toEqual(['steps[1].anchors[1]', 'anchor-not-in-sequence'])
    const unknown = refusal(() => processDeltaSequence(caseMethod(c, {}, [{ step: 'reference-gas', bracketing: 'nearest' }, { step: 'normalise', anchors: ['USGS40', 'LAB-X'] }]), built.items, referenceMaterials))
    expect([unknown.field, unknown.code]).toEqual(['steps[1].anchors[1]', 'unknown-material'])
  })

  it('a quantity with fewer anchors than the method needs is flagged and the sequence not accepted', () => {
    // USGS40 states δ13C but no δ18O: δ18O has one anchor only.
    const c = { ...cases.CO2!, anchors: ['IAEA-603', 'USGS40'], monitor: undefined }
    const built = buildSequence(c, 11)
    const out = processDeltaSequence(caseMethod(c), built.items, referenceMaterials)
    expect(out.accepted).toBe(false)
    expect(out.flags.find(f => f.code === 'too-few-anchors')!.message).toMatch(/δ18O/)
  })

  it('maxStandardResidual: a standard beyond it flags the sequence; a generous limit accepts it', () => {
    const c = cases.CO2!
    const built = buildSequence(c, 12)
    const strict = processDeltaSequence(caseMethod(c, { acceptance: { minAnchors: 2, maxStandardResidual: 1e-4 } }), built.items, referenceMaterials)
    expect(strict.accepted).toBe(false)
    expect(strict.flags.some(f => f.code === 'standard-residual' && f.position !== undefined)).toBe(true)
    const generous = processDeltaSequence(caseMethod(c, { acceptance: { minAnchors: 2, maxStandardResidual: 2 } }), built.items, referenceMaterials)
    expect(generous.accepted).toBe(true)
    const monitor = generous.items.find(i => i.material === 'USGS40')!
    expect(Math.abs(monitor.residual!['δ13C']!)).toBeLessThan(0.3)
  })
})

describe('the engine\'s constants against the simulator\'s, typed independently (simulateSequence.ts SIM)', () => {
  // An ideal instrument (no memory, fractionation, drift or H3+), noise off, no normalisation:
  // δ comes only from the reference gas's assigned δ and the constants, so a wrong K, λ or
  // 18R_VPDB-CO2 (Brand, Assonov & Coplen 2010) shows here; normalisation would hide most of it.
  it.each(['CO2', 'N2', 'O2', 'H2'])('%s: sample δ recovered within 1e-4 ‰', (gas) => {
    const c = cases[gas]!
    const built = buildSequence(c, 3, { noise: false, drawStandards: false, instrument: { memoryFraction: 0, fractionationPermilPerU: 0, driftPermilPerUPerHour: 0, h3FactorPerA: 0 } })
    const steps: MethodDefinition['steps'] = gas === 'CO2' ? [{ step: 'reference-gas', bracketing: 'neighbours-mean' }, { step: 'oxygen-17', parameters: 'brand-2010' }] : [{ step: 'reference-gas', bracketing: 'neighbours-mean' }]
    const out = processDeltaSequence(caseMethod(c, {}, steps), built.items, referenceMaterials)
    expect(worstError(out, built)).toBeLessThan(1e-4)
  })
})

describe('more than two anchors: the line\'s covariance inflated by MSWD > 1 (York et al., Am. J. Phys. 72 (2004) 367; Birge ratio)', () => {
  it('scales u(a), u(b) by √MSWD and cov by MSWD only above 1 and only with ν > 0', () => {
    const fit = { intercept: 0, slope: 1, uIntercept: 0.1, uSlope: 0.01, covariance: -1e-4, chi2: 4, dof: 1 }
    expect(inflateByMswd(fit)).toMatchObject({ uIntercept: 0.2, uSlope: 0.02, covariance: -4e-4 })
    expect(inflateByMswd({ ...fit, chi2: 0.5 })).toEqual({ ...fit, chi2: 0.5 })
    expect(inflateByMswd({ ...fit, dof: 0 })).toEqual({ ...fit, dof: 0 })
  })

  it('N2 on three anchors, one of them 0.5 ‰ off its accepted value: MSWD reported above 1 and the samples\' u grow', () => {
    const c = { ...cases.N2!, anchors: ['USGS40', 'USGS41a', 'IAEA-N-2'], monitor: undefined }
    const built = buildSequence(c, 21)
    const run = (materials: typeof referenceMaterials) => processDeltaSequence(caseMethod(c), built.items, materials)
    const consistent = run(referenceMaterials)
    const off = run({ ...referenceMaterials, 'IAEA-N-2': { ...referenceMaterials['IAEA-N-2']!, values: { 'δ15N': { value: 20.91, u: 0.12 } } } })
    expect(off.normalisation[0]!.mswd).toBeGreaterThan(4)
    const u = (o: SequenceOutcome) => o.items.find(i => i.position === built.samples[0]!.position)!.final['δ15N']!.u
    expect(u(off)).toBeGreaterThan(1.3 * u(consistent))
  })
})

describe('anchor replicates', () => {
  it('an anchor whose acquisitions disagree beyond their stated u is flagged; a clean sequence is not', () => {
    const c = cases.N2!
    const built = buildSequence(c, 14)
    expect(processDeltaSequence(caseMethod(c), built.items, referenceMaterials).flags.map(f => f.code)).not.toContain('anchor-scatter')
    const first = built.items.find(i => i.material === 'USGS41a')!
    const shifted = built.items.map(i => i === first ? { ...i, ratios: { '29/28': { ...i.ratios['29/28']!, value: i.ratios['29/28']!.value * 1.001 } } } : i)
    const out = processDeltaSequence(caseMethod(c), shifted, referenceMaterials)
    expect(out.flags.find(f => f.code === 'anchor-scatter')!.message).toMatch(/USGS41a/)
    // Judged against the reproducibility pooled from the other standards (leave-one-out, GUM 4.2.8).
    const repro = (out.steps.find(s => s.step === 'drift')!.parameters.reproducibility as { materials: { material: string, reducedChi2: number }[] }[])[0]!
    expect(repro.materials.find(m => m.material === 'USGS41a')!.reducedChi2).toBeGreaterThan(10)
  })
})

describe('the outcome', () => {
  it('survives JSON (it is stored and sent as it is): no NaN, Infinity, Map or function inside', () => {
    for (const gas of ['CO2', 'N2', 'O2', 'H2']) {
      const c = cases[gas]!
      const out = processDeltaSequence(caseMethod(c), buildSequence(c, 16, { blanks: true }).items, referenceMaterials)
      expect(JSON.parse(JSON.stringify(out))).toEqual(out)
      expect(JSON.stringify(out)).not.toMatch(/null/)
    }
  })
})

describe('the simulator', () => {
  it('repeats exactly for a seed and differs for another', () => {
    expect(buildSequence(cases.CO2!, 21).items).toEqual(buildSequence(cases.CO2!, 21).items)
    expect(buildSequence(cases.CO2!, 21).items[3]!.beams['45']!.value).not.toBe(buildSequence(cases.CO2!, 22).items[3]!.beams['45']!.value)
  })
})

describe('methods that cannot run are refused with the field at fault', () => {
  const c = cases.N2!
  const built = buildSequence(c, 13)
  const run = (m: Partial<MethodDefinition>, items = built.items) => refusal(() => processDeltaSequence({ ...caseMethod(c), ...m }, items, referenceMaterials))
  it.each<[string, Partial<MethodDefinition>, string, string]>([
    ['an oxygen-17 step on N2', { steps: [{ step: 'reference-gas', bracketing: 'nearest' }, { step: 'oxygen-17', parameters: 'brand-2010' }] }, 'steps[1].step', 'not-for-gas'],
    ['an H3+ factor on N2', { steps: [{ step: 'h3-factor' }, { step: 'reference-gas', bracketing: 'nearest' }] }, 'steps[0].step', 'not-for-gas'],
    ['drift before the reference gas', { steps: [{ step: 'drift', model: 'linear-time', material: 'USGS40' }, { step: 'reference-gas', bracketing: 'nearest' }] }, 'steps[0].step', 'out-of-order'],
    ['a mass-bias law on a δ system', { steps: [{ step: 'mass-bias', law: 'power', against: 'standard', material: 'AIR-N2' }] }, 'steps[0].step', 'not-for-delta'],
    ['a drift standard not in the sequence', { steps: [{ step: 'reference-gas', bracketing: 'nearest' }, { step: 'drift', model: 'linear-time', material: 'USGS25' }] }, 'steps[1].material', 'drift-standard-missing'],
    ['argon', { gas: 'Ar' }, 'gas', 'not-a-delta-system'],
    ['no normalisation and no reference-gas value', { referenceGas: {}, steps: [{ step: 'reference-gas', bracketing: 'nearest' }] }, 'referenceGas.δ15N', 'required'],
  ])('%s', (_, m, field, code) => {
    const e = run(m)
    expect([e.field, e.code]).toEqual([field, code])
  })

  it('CO2 without the oxygen-17 step', () => {
    const co2 = cases.CO2!
    const e = refusal(() => processDeltaSequence(caseMethod(co2, {}, [{ step: 'reference-gas', bracketing: 'nearest' }, { step: 'normalise', anchors: co2.anchors }]), buildSequence(co2, 1).items, referenceMaterials))
    expect([e.field, e.code]).toEqual(['steps[1]', 'oxygen-17-required'])
  })

  it('no reference-gas step', () => {
    const h2 = cases.H2!
    const e = refusal(() => processDeltaSequence(caseMethod(h2, {}, [{ step: 'h3-factor' }]), buildSequence(h2, 1).items, referenceMaterials))
    expect([e.field, e.code]).toEqual(['steps', 'incomplete'])
  })

  it('samples outside the anchors\' range are flagged as extrapolated', () => {
    const n2 = { ...cases.N2!, samples: [{ 'δ15N': 120 }] }
    const built = buildSequence(n2, 2, { noise: false, drawStandards: false })
    const out = processDeltaSequence(caseMethod(n2), built.items, referenceMaterials)
    expect(out.items.find(i => i.position === built.samples[0]!.position)!.flags.map(f => f.code)).toContain('extrapolated')
  })

  it('bad numbers and duplicate positions are refused by their field', () => {
    const at = (k: number, patch: object) => built.items.map((i, j) => j === k ? { ...i, ...patch } : i)
    expect(run({}, at(3, { ratios: { '29/28': { value: Number.NaN, u: 1e-7 } } })).field).toBe('items[3].ratios.29/28.value')
    expect(run({}, at(3, { ratios: { '29/28': { value: 0.0073, u: 0 } } })).field).toBe('items[3].ratios.29/28.u')
    expect(run({}, at(3, { beams: { 28: { value: 1e-9, u: -1 } } })).field).toBe('items[3].beams.28.u')
    expect([run({}, at(3, { position: 1 })).field, run({}, at(3, { position: 1 })).code]).toEqual(['items[3].position', 'duplicate'])
  })

  it('a sample no larger than the blank is refused, naming its beam', () => {
    const withBlank = buildSequence(c, 15, { blanks: true })
    const k = withBlank.items.findIndex(i => i.role === 'sample')
    const items = withBlank.items.map((i, j) => j === k ? { ...i, beams: { ...i.beams, 28: { value: 1e-14, u: 1e-15 } } } : i)
    const e = run({ steps: [{ step: 'blank' }, { step: 'reference-gas', bracketing: 'nearest' }] }, items)
    expect([e.field, e.code]).toEqual([`items[${k}].beams.28`, 'below-blank'])
  })

  it('a sequence without reference gas, and an acquisition without its ratio', () => {
    expect(run({}, built.items.filter(i => i.role !== 'reference-gas')).code).toBe('no-reference-gas')
    const broken = built.items.map(i => i.position === 2 ? { ...i, ratios: {}, beams: { 28: i.beams['28']! } } : i)
    const e = run({}, broken)
    expect([e.field, e.code]).toEqual(['items[1].ratios.29/28', 'missing'])
  })
})
