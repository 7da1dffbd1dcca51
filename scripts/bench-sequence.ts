// The sequence benchmark (part of `npm run bench`; alone: `npx tsx scripts/bench-sequence.ts`):
// a 200-acquisition CO2 sequence of 1,000-point sweeps posted whole with a lab key, timed from
// the request to the answer, which comes once every acquisition is ingested and the sequence is
// processed (17O correction, drift, normalisation, control charts, the partners' event).
// Goal: under 2 s. Own database `arcwise_bench`, port 3300. Prints one JSON object.
import { readFileSync } from 'node:fs'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { acceptedValue, defaultSimulatedInstrument, formulaSpecies, referenceMaterials, simulateFieldSweep, simulateSequence } from '../shared/engine'
import type { SimulatedAcquisition } from '../shared/engine/isotopes/simulateSequence'
import type { SequenceItem } from '../shared/engine/isotopes/types'
import type { MethodDefinition } from '../shared/schemas/methods'
import { buildIfStale } from './lib/build'
import { demoInstruments } from './lib/demo-instruments'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { benchStoreEnv, startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const base = `http://127.0.0.1:${PORT}`
const LENGTH = 200
const POINTS = 1000

const method: MethodDefinition = {
  gas: 'CO2',
  referenceGas: { 'δ13C': { value: -36.2, u: 0.1 }, 'δ18O': { value: -12.4, u: 0.1 } },
  steps: [
    { step: 'reference-gas', bracketing: 'neighbours-mean' }, { step: 'oxygen-17', parameters: 'brand-2010' },
    { step: 'drift', model: 'linear-time', material: 'IAEA-603' }, { step: 'normalise', anchors: ['IAEA-603', 'LSVEC'] },
  ],
  acceptance: { minAnchors: 2 },
}

/** Reference gas every third position, the two anchors in turn between samples (common practice, no source). */
function layout(): SimulatedAcquisition[] {
  const truth = (id: string) => ({ 'δ13C': acceptedValue(referenceMaterials[id]!, 'δ13C', 'VPDB')!.value, 'δ18O': acceptedValue(referenceMaterials[id]!, 'δ18O', 'VPDB')!.value })
  return Array.from({ length: LENGTH }, (_, i): SimulatedAcquisition => {
    if (i % 3 === 0) return { role: 'reference-gas', truth: { 'δ13C': -36.2, 'δ18O': -12.4 }, majorA: 1e-8 }
    if (i % 12 === 1) return { role: 'working-standard', material: 'IAEA-603', truth: truth('IAEA-603'), majorA: 1e-8 }
    if (i % 12 === 7) return { role: 'working-standard', material: 'LSVEC', truth: truth('LSVEC'), majorA: 1e-8 }
    return { role: 'sample', truth: { 'δ13C': -30 + (i % 17) * 2, 'δ18O': -15 + (i % 11) }, majorA: 1e-8 }
  })
}

const co2Lines: Record<string, string> = { 44: 'CO2', 45: '[13C]O2', 46: 'C[18O]O' }

function sweepOf(item: SequenceItem, runId: string) {
  const inst = demoInstruments.find(i => i.slug === 'irms-north')!
  const raw = simulateFieldSweep({
    geometry: inst.geometry, acceleratingVoltageV: 3000, mzFrom: 43.5, mzTo: 46.5, points: POINTS, resolvingPower: 950, seed: item.position,
    species: Object.entries(co2Lines).map(([mz, f]) => ({ species: formulaSpecies(f), currentA: item.beams[mz]!.value })), noiseA: 2e-16, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument: inst.slug, runId, acquiredAt: new Date(item.acquiredAt).toISOString(),
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field', unit: 'T', values: Array.from(raw.sweep!.values) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values) }],
    processing: { formulas: Object.values(co2Lines) },
  }
}

function sequenceBody(n: number) {
  // Within the last day, so every acquisition is after the demo geometry's start and not in the future.
  const items = simulateSequence({ gas: 'CO2', seed: n, instrument: { ...defaultSimulatedInstrument, background: { 'δ13C': -8, 'δ18O': -20 } }, acquisitions: layout(), startMs: Date.now() - 86_400_000, spacingMs: 4 * 60_000 })
  return {
    instrument: 'irms-north', sequenceId: `bench-${process.pid}-${n}`,
    acquisitions: items.map(item => ({ position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}), acquisition: sweepOf(item, `bench-${process.pid}-${n}-${item.position}`) })),
  }
}

export async function benchSequence(opts: { runs?: number } = {}) {
  const runs = opts.runs ?? Number(process.env.BENCH_SEQUENCE_RUNS ?? 3)
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
  buildIfStale()
  const server = startServer({ ...stack.serverEnv, ...benchStoreEnv(), NUXT_RATE_LIMIT_PER_MINUTE: '100000000' }, PORT)
  try {
    await waitForServer(`${base}/api/health`)
    const key = (JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>)['saltmarsh-isotopes']!
    const post = (path: string, body: unknown) => fetch(`${base}${path}`, { method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${key}` }, body: JSON.stringify(body) })
    const registered = await post('/api/v1/instruments/irms-north/methods', { name: 'CO2, two anchors', validFrom: new Date(Date.now() - 30 * 86_400_000).toISOString(), definition: method })
    if (registered.status !== 201) throw new Error(`registering the method answered ${registered.status}: ${await registered.text()}`)
    const timings: number[] = []
    let bodyMb = 0
    // One warm-up sequence (JIT, prepared statements), then the timed ones.
    for (let n = 0; n <= runs; n++) {
      const text = JSON.stringify(sequenceBody(n))
      bodyMb = Number((text.length / 1e6).toFixed(1))
      const started = performance.now()
      const res = await fetch(`${base}/api/v1/sequences`, { method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${key}` }, body: text })
      const answer = await res.json() as { status?: string, detail?: string }
      const ms = performance.now() - started
      if (res.status !== 201 || answer.status !== 'processed') throw new Error(`the sequence answered ${res.status} ${answer.status ?? ''}: ${answer.detail ?? ''}`)
      if (n > 0) timings.push(Math.round(ms))
    }
    const sorted = [...timings].sort((a, b) => a - b)
    const medianMs = sorted[Math.floor(sorted.length / 2)]!
    return { acquisitions: LENGTH, pointsPerAcquisition: POINTS, bodyMb, runs: timings, medianMs, goalMs: '< 2000', met: medianMs < 2000 }
  }
  finally {
    server.kill('SIGTERM')
    await stack.stop()
  }
}

if (import.meta.url === `file://${process.argv[1]}`) {
  log('sequence benchmark: about a minute')
  const result = await benchSequence()
  console.log(JSON.stringify({ benchmark: 'sequence', node: process.version, cores: cpus().length, ...result }, null, 2))
}
