import type { MethodDefinition } from '../../shared/schemas/methods'
import { referenceMaterials, seededNormal, simulateSequence } from '../../shared/engine'
import { defaultSimulatedInstrument, type DeltaGasSystem, type SimulatedAcquisition, type SimulatedInstrument } from '../../shared/engine/isotopes/simulateSequence'
import type { MaterialValues, SequenceItem } from '../../shared/engine/isotopes'

// Simulated δ sequences for the isotope engine's tests: a layout of anchors, a drift standard,
// samples of known truth and the reference gas between them. Standards' true values are drawn
// from N(accepted, u) per seed (their accepted values are themselves uncertain), so coverage is
// tested against the whole budget.

export interface DeltaCase {
  gas: DeltaGasSystem
  anchors: string[]
  /** A standard measured but not anchoring (checks the residuals). */
  monitor?: string
  samples: Record<string, number>[]
  referenceGas: Record<string, number>
  instrument?: Partial<SimulatedInstrument>
  majorA: number
  oxygenScale?: 'VPDB' | 'VSMOW'
}

// H2: an H3+ factor of 5e3 per A (5 ppm/nA), the order of magnitude Sessions et al. (2001) report (from memory).
export const cases: Record<string, DeltaCase> = {
  CO2: { gas: 'CO2', anchors: ['IAEA-603', 'LSVEC'], monitor: 'USGS40', samples: [{ 'δ13C': -25.3, 'δ18O': -8.1 }, { 'δ13C': -12.0, 'δ18O': -15.5 }, { 'δ13C': 0.8, 'δ18O': -1.2 }], referenceGas: { 'δ13C': -36.2, 'δ18O': -12.4 }, majorA: 1e-8, instrument: { background: { 'δ13C': -8, 'δ18O': -20 } } },
  N2: { gas: 'N2', anchors: ['USGS40', 'USGS41a'], monitor: 'IAEA-N-2', samples: [{ 'δ15N': 6.3 }, { 'δ15N': -2.2 }, { 'δ15N': 31.7 }], referenceGas: { 'δ15N': -1.5 }, majorA: 8e-9, instrument: { background: { 'δ15N': 0 } } },
  O2: { gas: 'O2', anchors: ['VSMOW2', 'SLAP2'], samples: [{ 'δ18O': 23.8 }, { 'δ18O': -12.5 }, { 'δ18O': -40.2 }], referenceGas: { 'δ18O': 10.0 }, majorA: 5e-9, instrument: { background: { 'δ18O': 0 } } },
  H2: { gas: 'H2', anchors: ['VSMOW2', 'SLAP2'], monitor: 'GISP', samples: [{ 'δ2H': -60.4 }, { 'δ2H': -150.2 }, { 'δ2H': -300.9 }], referenceGas: { 'δ2H': -120 }, majorA: 6e-9, instrument: { background: { 'δ2H': -80 }, h3FactorPerA: 5e3 } },
}

export function caseMethod(c: DeltaCase, extra: Partial<MethodDefinition> = {}, steps?: MethodDefinition['steps']): MethodDefinition {
  const gasSteps: MethodDefinition['steps'] = c.gas === 'CO2'
    ? [{ step: 'reference-gas', bracketing: 'neighbours-mean' }, { step: 'oxygen-17', parameters: 'brand-2010' }]
    : c.gas === 'H2'
      ? [{ step: 'h3-factor' }, { step: 'reference-gas', bracketing: 'neighbours-mean' }]
      : [{ step: 'reference-gas', bracketing: 'neighbours-mean' }]
  return {
    gas: c.gas,
    referenceGas: Object.fromEntries(Object.entries(c.referenceGas).map(([q, v]) => [q, { value: v, u: 0.1 }])),
    steps: steps ?? [...gasSteps, { step: 'drift', model: 'linear-time', material: c.anchors[0]! }, { step: 'normalise', anchors: c.anchors }],
    acceptance: { minAnchors: Math.min(2, c.anchors.length) },
    ...(c.oxygenScale ? { oxygenScale: c.oxygenScale } : {}),
    ...extra,
  }
}

/**
 * A material's true value for the simulation, read from its stated values and converted here,
 * not by the engine's acceptedValue: δ18O VPDB ↔ VSMOW by 1.03092 and 30.92 (Brand et al.,
 * Pure Appl. Chem. 86 (2014) 425; from memory), typed independently of the engine.
 */
function truthValue(material: MaterialValues, q: string, scale: string): { value: number, u: number } | undefined {
  const v = (k: string) => Object.hasOwn(material.values, k) ? material.values[k] : undefined
  if (q !== 'δ18O') return v(q)
  if (scale === 'VPDB') {
    const w = v('δ18O')
    return v('δ18O_VPDB') ?? (w && { value: (w.value - 30.92) / 1.03092, u: w.u / 1.03092 })
  }
  const p = v('δ18O_VPDB')
  return v('δ18O') ?? (p && { value: 1.03092 * p.value + 30.92, u: 1.03092 * p.u })
}

export interface Built { items: SequenceItem[], samples: { position: number, truth: Record<string, number> }[] }

/** Anchor 1 at the start, middle and end (the drift standard), the others and samples between, reference gas around each. */
export function buildSequence(c: DeltaCase, seed: number, options: { noise?: boolean, drawStandards?: boolean, blanks?: boolean, instrument?: Partial<SimulatedInstrument>, materials?: Record<string, MaterialValues>, majorScale?: number, layout?: 'interleaved' | 'drift-lever', replicates?: number } = {}): Built {
  const draw = seededNormal(seed * 7919 + 13)
  const scaleOf = (q: string) => q === 'δ13C' ? 'VPDB' : q === 'δ15N' ? 'AIR' : q === 'δ18O' && c.gas === 'CO2' ? (c.oxygenScale ?? 'VPDB') : 'VSMOW'
  const truthOf = (id: string): Record<string, number> => Object.fromEntries(Object.keys(c.referenceGas).flatMap((q) => {
    const a = truthValue((options.materials ?? referenceMaterials)[id]!, q, scaleOf(q))
    return a ? [[q, a.value + (options.drawStandards === false ? 0 : a.u * draw())]] : [[q, 0]]
  }))
  const standards = [c.anchors[0]!, ...c.anchors.slice(1), ...(c.monitor ? [c.monitor] : [])]
  const truths = new Map(standards.map(id => [id, truthOf(id)]))
  const layout: SimulatedAcquisition[] = []
  const majorA = c.majorA * (options.majorScale ?? 1)
  const ref = (scale = 1) => layout.push({ role: 'reference-gas', truth: c.referenceGas, majorA: majorA * scale })
  const std = (id: string) => layout.push({ role: 'working-standard', material: id, truth: truths.get(id)!, majorA })
  const samplePositions: { position: number, truth: Record<string, number> }[] = []
  const blank = () => { if (options.blanks) layout.push({ role: 'blank', truth: {}, majorA: 0 }) }
  blank()
  ref(0.6)
  std(c.anchors[0]!)
  ref(1)
  if (options.layout === 'drift-lever') {
    // Every standard early, then hours of reference gas, then the samples: the drift fitted on
    // the early standards is extrapolated to the samples, so its slope's u dominates theirs.
    std(c.anchors[0]!)
    ref(1)
    for (let k = 0; k < (options.replicates ?? 1); k++) for (const id of standards.slice(1)) { std(id); ref(1.4); std(id); ref(0.8) }
    for (let k = 0; k < 12; k++) ref(1)
    for (const s of c.samples) { layout.push({ role: 'sample', truth: s, majorA }); samplePositions.push({ position: layout.length, truth: s }); ref(1.2) }
    blank()
    return finish()
  }
  // replicates: the other standards' block repeated, as a lab measures its standards through a run.
  for (let k = 0; k < (options.replicates ?? 1); k++) for (const id of standards.slice(1)) { std(id); ref(1.4); std(id); ref(0.8) }
  for (const s of c.samples) { layout.push({ role: 'sample', truth: s, majorA }); samplePositions.push({ position: layout.length, truth: s }); ref(1.2) }
  std(c.anchors[0]!)
  blank()
  ref(0.7)
  for (const id of standards.slice(1)) { std(id); ref(1.1) }
  std(c.anchors[0]!)
  ref(1)
  blank()
  return finish()

  function finish(): Built {
    const instrument: SimulatedInstrument = { ...defaultSimulatedInstrument, ...c.instrument, ...options.instrument, noise: options.noise ?? true }
    // A procedural blank of 0.3 % of the major beam, isotopically far from everything (made-up test values, no source).
    if (options.blanks) instrument.blank = { majorA: majorA * 3e-3, delta: Object.fromEntries(Object.keys(c.referenceGas).map(q => [q, -60])) }
    return { items: simulateSequence({ gas: c.gas, seed, instrument, acquisitions: layout, oxygenScale: c.oxygenScale }), samples: samplePositions }
  }
}
