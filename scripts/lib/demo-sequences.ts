// The demo's isotope history (issue 19), invented for the demo. The Saltmarsh lab's carbonate
// bench (irms-north) runs a CO2 sequence every four days for four months, each with the
// reference gas between acquisitions, two international anchors (IAEA-603 and LSVEC), the
// lab's own marble as a monitoring standard and four core samples. Its partner receives the
// samples' δ13C and δ18O on VPDB. One sequence, three weeks ago, measured a marble aliquot from
// a vial left uncapped: its δ13C breaks the 1-3s rule, the one violation the charts (δ13C and
// δ18O of every standard) hold.
// Halvard Ridge's noble-gas sector measures argon from rock samples against air aliquots
// (exponential mass-bias law) twice a week for three weeks; its partner receives the corrected
// 40Ar/36Ar and 38Ar/36Ar.
//
// The acquisitions are built from first principles by the engine's sequence simulator
// (shared/engine/isotopes/simulateSequence.ts) and posted as 1,000-point field sweeps through
// the API, exactly as a lab system would post them.
import { acceptedValue, formulaSpecies, geometry, isotope, referenceMaterials, simulateFieldSweep, simulateSequence, type SequenceItem } from '../../shared/engine'
import { ATMOSPHERIC_ARGON } from '../../shared/engine/isotopes/massBias'
import { simulateArgonSequence } from '../../shared/engine/isotopes/simulateNobleGas'
import { defaultSimulatedInstrument, type SimulatedAcquisition } from '../../shared/engine/isotopes/simulateSequence'
import type { MethodDefinition } from '../../shared/schemas/methods'

export const DEMO_SEQUENCE_INSTRUMENT = 'irms-north'
export const DEMO_MONITOR = 'SM-MARBLE'
const DAY = 86_400_000
const SPACING_MS = 15 * 60_000
/** Sequences in the history, every four days, the last two days ago. */
export const DEMO_SEQUENCE_COUNT = 30
/** The sequence whose marble aliquot was spoiled (0-based, so the 26th of 30: about three weeks ago). */
export const DEMO_SPOILED_SEQUENCE = 25

/** The lab's monitoring standard, calibrated against IAEA-603 and LSVEC (invented values). */
export const demoMonitorStandard = {
  code: DEMO_MONITOR,
  name: 'Saltmarsh marble',
  values: { 'δ13C': { value: 1.62, u: 0.03 }, 'δ18O_VPDB': { value: -4.31, u: 0.05 } },
  calibratedAgainst: ['IAEA-603', 'LSVEC'],
  note: 'Carrara-type marble, crushed and homogenised in-house (demo)',
}

/** The carbonate bench's method: bracketing against the reference gas, 17O (Brand et al. 2010), drift, two-point normalisation. */
export const demoCo2Method: MethodDefinition = {
  gas: 'CO2',
  referenceGas: { 'δ13C': { value: -36.2, u: 0.1 }, 'δ18O': { value: -12.4, u: 0.1 } },
  oxygenScale: 'VPDB',
  steps: [
    { step: 'reference-gas', bracketing: 'neighbours-mean' },
    { step: 'oxygen-17', parameters: 'brand-2010' },
    { step: 'drift', model: 'linear-time', material: 'IAEA-603' },
    { step: 'normalise', anchors: ['IAEA-603', 'LSVEC'] },
  ],
  acceptance: { maxStandardResidual: 0.15, minAnchors: 2 },
}

const bench = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.005 } })
const co2Lines: [string, string][] = [['44', 'CO2'], ['45', '[13C]O2'], ['46', 'C[18O]O']]

/** One simulated acquisition as the bench's system posts it: a 1,000-point sweep whose CO2 lines carry the item's beams. */
function sweepOf(item: SequenceItem, runId: string, sampleRef: string | undefined) {
  const raw = simulateFieldSweep({
    geometry: bench, acceleratingVoltageV: 3000, mzFrom: 43.5, mzTo: 46.5, points: 1000, resolvingPower: 950, seed: 17,
    species: co2Lines.filter(([mz]) => item.beams[mz]).map(([mz, formula]) => ({ species: formulaSpecies(formula), currentA: Math.max(item.beams[mz]!.value, 0) })),
    noiseA: 1e-17, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument: DEMO_SEQUENCE_INSTRUMENT, runId, acquiredAt: new Date(item.acquiredAt).toISOString(), ...(sampleRef ? { sampleRef } : {}),
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values, v => Number(v.toPrecision(10))) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values, v => Number(v.toPrecision(8))) }],
    processing: { formulas: co2Lines.map(([, f]) => f) },
  }
}

// The scatter of each standard from one sequence to the next (aliquot preparation), in ‰:
// designed rather than drawn, so the charts stay in control apart from the spoiled vial. Signs
// alternate and sizes stay within a factor of two, so no run rule (2-2s, 4-1s, 10x) or CUSUM
// can fire on them; the drift standard's three deviations are orthogonal to a straight line in
// time, so the drift step leaves them as they are.
const sizes = [0.9, 0.6, 1.0, 0.7, 0.8, 0.55, 0.95, 0.65, 0.85, 0.75]
const scatter = (i: number, base: number) => (i % 2 ? -1 : 1) * sizes[i % sizes.length]! * base

interface DemoSequence { id: string, startMs: number, body: unknown }

/** The whole history, oldest first: sequence ids, start times and request bodies. */
export function demoCo2Sequences(now = Date.now()): DemoSequence[] {
  const truth = (id: string) => {
    const m = id === DEMO_MONITOR ? { id, name: id, source: '', values: demoMonitorStandard.values } : referenceMaterials[id]!
    return { 'δ13C': acceptedValue(m, 'δ13C', 'VPDB')!.value, 'δ18O': acceptedValue(m, 'δ18O', 'VPDB')!.value }
  }
  const refGas = { 'δ13C': -36.2, 'δ18O': -12.4 }
  const firstDay = Math.floor((now - (2 + 4 * (DEMO_SEQUENCE_COUNT - 1)) * DAY) / DAY) * DAY
  const out: DemoSequence[] = []
  for (let k = 0; k < DEMO_SEQUENCE_COUNT; k++) {
    const startMs = firstDay + k * 4 * DAY + 8 * 3_600_000
    const layout: (SimulatedAcquisition & { sampleRef?: string })[] = []
    const ref = () => layout.push({ role: 'reference-gas', truth: refGas, majorA: 1e-8 })
    const std = (id: string, role: 'working-standard' | 'monitoring-standard', d13: number, d18: number) => {
      const t = truth(id)
      layout.push({ role, material: id, truth: { 'δ13C': t['δ13C'] + d13, 'δ18O': t['δ18O'] + d18 }, majorA: 1e-8 })
    }
    // Drift standard at positions 2, 16 and 20 (times 1, 15 and 19 spacings): deviations ∝ (−4, 18, −14)/18.
    // δ18O is charted too: its standards scatter by the same design (without it every δ18O
    // point sat on its accepted value, the chart's s was ~0 and each rounding broke a rule).
    const a = scatter(k, 0.005)
    const b = Math.abs(scatter(k + 3, 0.025))
    const a18 = scatter(k + 5, 0.02)
    const b18 = Math.abs(scatter(k + 7, 0.04))
    const spoiled = k === DEMO_SPOILED_SEQUENCE
    ref(); std('IAEA-603', 'working-standard', a * -4 / 18, a18 * -4 / 18)
    ref(); std('LSVEC', 'working-standard', b, b18)
    ref(); std(DEMO_MONITOR, 'monitoring-standard', spoiled ? 0.028 : scatter(k + 1, 0.008), scatter(k + 6, 0.03))
    const cores = [
      { 'δ13C': -27.9 + (k % 5) * 0.8, 'δ18O': -9.6 + (k % 3) * 0.7 },
      { 'δ13C': -14.2 - (k % 4) * 0.6, 'δ18O': -6.1 - (k % 5) * 0.3 },
      { 'δ13C': -3.4 + (k % 3) * 0.5, 'δ18O': -2.8 + (k % 4) * 0.2 },
      { 'δ13C': 0.9 - (k % 6) * 0.3, 'δ18O': -1.5 - (k % 2) * 0.4 },
    ]
    // The cores' own compositions are not round numbers: with the simulator's noise off (for
    // the charts above), a round truth came back to the last digit and looked invented.
    const composition = (c: { 'δ13C': number, 'δ18O': number }, j: number) => ({ 'δ13C': c['δ13C'] + scatter(k + 2 * j, 0.137), 'δ18O': c['δ18O'] + scatter(k + 3 * j + 1, 0.093) })
    cores.forEach((c, j) => { ref(); layout.push({ role: 'sample', truth: composition(c, j), majorA: 1e-8, sampleRef: `SM-CORE-${String(k * 4 + j + 101).padStart(4, '0')}` }) })
    ref(); std('IAEA-603', 'working-standard', a, a18)
    ref(); std('LSVEC', 'working-standard', -b, -b18)
    ref(); std('IAEA-603', 'working-standard', a * -14 / 18, a18 * -14 / 18)
    ref()
    const items = simulateSequence({
      gas: 'CO2', seed: 1000 + k, oxygenScale: 'VPDB', startMs, spacingMs: SPACING_MS, acquisitions: layout,
      // The bench drifts a little from week to week; normalisation takes it out.
      instrument: { ...defaultSimulatedInstrument, background: { 'δ13C': -8, 'δ18O': -20 }, fractionationPermilPerU: -1.2 + 0.05 * Math.sin(k), noise: false },
    })
    const id = `SM-${new Date(startMs).toISOString().slice(0, 10)}-CO2`
    out.push({
      id, startMs,
      body: {
        instrument: DEMO_SEQUENCE_INSTRUMENT, sequenceId: id,
        acquisitions: items.map((item, i) => ({
          position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}),
          acquisition: sweepOf(item, `${id}-${String(item.position).padStart(2, '0')}`, layout[i]!.sampleRef),
        })),
      },
    })
  }
  return out
}

async function call(appUrl: string, secret: string, method: string, path: string, body?: unknown, idempotencyKey?: string) {
  const res = await fetch(`${appUrl}${path}`, {
    method,
    headers: { 'content-type': 'application/json', 'authorization': `Bearer ${secret}`, ...(idempotencyKey ? { 'idempotency-key': idempotencyKey } : {}) },
    body: body === undefined ? undefined : JSON.stringify(body),
  })
  return { status: res.status, body: await res.json() as Record<string, unknown> }
}

/**
 * Registers the monitoring standard and the bench's method (once) and posts the history
 * through the API with the lab's key. Posting again replays: sequence ids are fixed and each
 * request carries its id as Idempotency-Key. Returns how many sequences the hub holds.
 */
export async function postDemoSequences(appUrl: string, secret: string, now = Date.now()): Promise<number> {
  const sequences = demoCo2Sequences(now)
  const historyStart = new Date(sequences[0]!.startMs - DAY).toISOString()
  const standards = await call(appUrl, secret, 'GET', '/api/v1/standards')
  if (!(standards.body.items as { code: string }[] | undefined)?.some(s => s.code === DEMO_MONITOR)) {
    const res = await call(appUrl, secret, 'POST', '/api/v1/standards', { ...demoMonitorStandard, validFrom: historyStart })
    if (res.status !== 201) throw new Error(`registering ${DEMO_MONITOR} answered ${res.status}: ${JSON.stringify(res.body)}`)
  }
  const methods = await call(appUrl, secret, 'GET', `/api/v1/instruments/${DEMO_SEQUENCE_INSTRUMENT}/methods`)
  if (!(methods.body.items as unknown[] | undefined)?.length) {
    const res = await call(appUrl, secret, 'POST', `/api/v1/instruments/${DEMO_SEQUENCE_INSTRUMENT}/methods`, { name: 'Carbonate CO2, two-point VPDB', validFrom: historyStart, definition: demoCo2Method, note: 'demo method' })
    if (res.status !== 201) throw new Error(`registering the demo method answered ${res.status}: ${JSON.stringify(res.body)}`)
  }
  let stored = 0
  for (const s of sequences) {
    const res = await call(appUrl, secret, 'POST', '/api/v1/sequences', s.body, s.id)
    if (res.status >= 300) throw new Error(`posting demo sequence ${s.id} answered ${res.status}: ${JSON.stringify(res.body).slice(0, 600)}`)
    stored++
  }
  return stored
}

export const DEMO_ARGON_INSTRUMENT = 'noble-gas-1'
/** Argon sequences: three air aliquots each, so the air chart stays under the 20 points it needs for its own s. */
export const DEMO_ARGON_SEQUENCE_COUNT = 6

/** The noble-gas sector's method: the exponential law against the air aliquots bracketing the samples. */
export const demoArgonMethod: MethodDefinition = {
  gas: 'Ar',
  steps: [{ step: 'blank' }, { step: 'mass-bias', law: 'exponential', against: 'standard', material: ATMOSPHERIC_ARGON.id }],
  acceptance: { minAnchors: 1 },
}

const sector = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0.002 } })

/** One argon acquisition as the sector's system posts it: a 1,000-point sweep over m/z 35–41 carrying the item's beams. */
function argonSweepOf(item: SequenceItem, runId: string, sampleRef: string | undefined) {
  const raw = simulateFieldSweep({
    geometry: sector, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 41, points: 1000, resolvingPower: 600, seed: 23,
    species: (['36', '38', '40'] as const).map(m => ({ species: isotope(`${m}Ar`), currentA: Math.max(item.beams[m]!.value, 1e-18) })),
    noiseA: 1e-18, baselineA: 3e-16, currentUnit: 'fA',
  })
  return {
    instrument: DEMO_ARGON_INSTRUMENT, runId, acquiredAt: new Date(item.acquiredAt).toISOString(), ...(sampleRef ? { sampleRef } : {}),
    settings: { acceleratingVoltage: { value: 4.5, unit: 'kV', u: 0.0009 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values, v => Number(v.toPrecision(10))) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values, v => Number(v.toPrecision(8))) }],
    processing: { formulas: ['[36Ar]', '[38Ar]', '[40Ar]'] },
  }
}

/** Halvard Ridge's argon history, oldest first: a procedural blank, air, two rocks, air, two rocks, air, a second blank. */
export function demoArgonSequences(now = Date.now()): DemoSequence[] {
  const out: DemoSequence[] = []
  const firstDay = Math.floor((now - 20 * DAY) / DAY) * DAY
  for (let k = 0; k < DEMO_ARGON_SEQUENCE_COUNT; k++) {
    const startMs = firstDay + k * 3.5 * DAY + 9 * 3_600_000
    // Rocks with radiogenic 40Ar in excess of air (invented), and air's 38Ar/36Ar.
    const rock = (j: number) => ({ role: 'sample' as const, truth: { '40/36': 420 + 95 * ((k + j) % 4), '38/36': 0.1885 }, current40A: 1.5e-9 })
    const air = { role: 'working-standard' as const, material: ATMOSPHERIC_ARGON.id, current40A: 1e-9 }
    const specs = [{ role: 'blank' as const }, air, rock(0), rock(1), air, rock(2), rock(3), air, { role: 'blank' as const }]
    const sim = simulateArgonSequence({ seed: 500 + k, items: specs, beta: 0.35 + 0.04 * Math.sin(k), blank40A: 2e-12, startAt: startMs, spacingMs: 40 * 60_000 })
    const id = `HR-${new Date(startMs).toISOString().slice(0, 10)}-AR`
    let sample = 0
    out.push({
      id, startMs,
      body: {
        instrument: DEMO_ARGON_INSTRUMENT, sequenceId: id,
        acquisitions: sim.items.map(item => ({
          position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}),
          acquisition: argonSweepOf(item, `${id}-${item.position}`, item.role === 'sample' ? `HR-ROCK-${String(k * 4 + ++sample + 40).padStart(3, '0')}` : undefined),
        })),
      },
    })
  }
  return out
}

/** Registers the sector's method (once) and posts its argon history with Halvard Ridge's key; replays are harmless. */
export async function postDemoArgonSequences(appUrl: string, secret: string, now = Date.now()): Promise<number> {
  const sequences = demoArgonSequences(now)
  const methods = await call(appUrl, secret, 'GET', `/api/v1/instruments/${DEMO_ARGON_INSTRUMENT}/methods`)
  if (!(methods.body.items as unknown[] | undefined)?.length) {
    const res = await call(appUrl, secret, 'POST', `/api/v1/instruments/${DEMO_ARGON_INSTRUMENT}/methods`, { name: 'Argon against air, exponential law', validFrom: new Date(sequences[0]!.startMs - DAY).toISOString(), definition: demoArgonMethod, note: 'demo method' })
    if (res.status !== 201) throw new Error(`registering the demo argon method answered ${res.status}: ${JSON.stringify(res.body)}`)
  }
  let stored = 0
  for (const s of sequences) {
    const res = await call(appUrl, secret, 'POST', '/api/v1/sequences', s.body, s.id)
    if (res.status >= 300) throw new Error(`posting demo sequence ${s.id} answered ${res.status}: ${JSON.stringify(res.body).slice(0, 600)}`)
    stored++
  }
  return stored
}
