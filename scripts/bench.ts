// `npm run bench`: every benchmark, each beside its baseline in the same run, as one JSON
// report under reports/ and a table. Starts what it needs (its own database `arcwise_bench`,
// the built server, local sinks on loopback) and stops it; about seven minutes.
// Figures are ratios where a baseline exists: the machine is shared and noisy.
import { execFileSync } from 'node:child_process'
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs'
import { cpus, totalmem } from 'node:os'
import { join } from 'node:path'
import { benchDelivery } from './bench-delivery'
import { benchEngine } from './bench-engine'
import { benchFairness } from './bench-fairness'
import { benchIngest } from './bench-ingest'
import { benchObjectStore } from './bench-ingest-store'
import { benchLatency } from './bench-latency'
import { benchReprocess } from './bench-reprocess'
import { benchSequence } from './bench-sequence'
import { log, root } from './lib/paths'
import { findPgBin } from './lib/pg'

function versions() {
  const lock = JSON.parse(readFileSync(join(root, 'package-lock.json'), 'utf8')) as { packages: Record<string, { version?: string }> }
  const of = (name: string) => lock.packages[`node_modules/${name}`]?.version ?? 'unknown'
  let postgresql = 'unknown'
  try { postgresql = execFileSync(join(findPgBin(), 'postgres'), ['--version'], { encoding: 'utf8' }).trim() }
  catch { /* reported as unknown */ }
  return { node: process.version, postgresql, nuxt: of('nuxt'), 'drizzle-orm': of('drizzle-orm'), postgres: of('postgres'), undici: of('undici'), standardwebhooks: of('standardwebhooks') }
}

const machine = { cores: cpus().length, cpu: cpus()[0]?.model ?? 'unknown', memoryGb: Math.round(totalmem() / 2 ** 30) }
log(`benchmarks on ${machine.cores} cores (${machine.cpu}); about seven minutes`)
log('1/7 engine')
const engine = benchEngine()
log('2/7 ingest and the 10^6-point upload')
const ingest = await benchIngest()
log('2b/7 raw data in PostgreSQL against the object store')
const objectStore = await benchObjectStore()
log('3/7 delivery, beside the bare sender and graphile-worker')
const delivery = await benchDelivery()
log('4/7 fairness: healthy endpoints beside slow and failing ones')
const fairness = await benchFairness()
log('5/7 ingest-to-receipt latency')
const latency = await benchLatency()
log('6/7 a 200-acquisition sequence')
const sequence = await benchSequence()
log('7/7 reprocessing 10,000 stored acquisitions')
const reprocess = await benchReprocess()

const report = { kind: 'bench', at: new Date().toISOString(), machine, versions: versions(), engine, ingest, objectStore, delivery, fairness, latency, sequence, reprocess }
mkdirSync(join(root, 'reports'), { recursive: true })
const file = join(root, 'reports', `bench-${report.at.replace(/[:.]/g, '-')}.json`)
writeFileSync(file, JSON.stringify(report, null, 2))

const met = (ok: boolean) => ok ? 'met' : 'NOT met'
// An endpoint's p99, or what stands in for it when nothing reached any endpoint (worst is NaN).
const p99Text = (e: { p99: number } | undefined) => e ? `${e.p99} ms` : 'nothing received'
const rows: Record<string, { figure: string, baseline: string, ratio: string, goal: string, verdict: string }> = {
  'engine: m/z conversion, 10^6 points': {
    figure: `${engine.conversion.engineMs} ms`, baseline: `bare loop, same formula ${engine.conversion.bareLoopMs} ms (non-relativistic ${engine.conversion.nonRelativisticBareLoop.ms} ms)`, ratio: String(engine.conversion.ratio), goal: '≤ 1.5', verdict: met(engine.conversion.ratio <= 1.5),
  },
  ...Object.fromEntries(engine.pipeline.map(p => [`engine: pipeline, ${p.points.toLocaleString('en')} points`, {
    figure: `${p.pointsPerSecond.toLocaleString('en')} points/s`, baseline: '', ratio: `${p.nsPerPoint} ns/point`, goal: '', verdict: '',
  }])),
  'engine: cost per point, 10^3 vs 10^6': { figure: '', baseline: '', ratio: String(engine.costPerPointSpread.ratio), goal: '≤ 2', verdict: met(engine.costPerPointSpread.ratio <= 2) },
  'ingest: acquisitions/s (1,000 points)': {
    figure: `${ingest.ingest.requestsPerSecond}/s`, baseline: `baseline route ${ingest.baseline.requestsPerSecond}/s`, ratio: String(ingest.ratio.value), goal: '≥ 0.5', verdict: met(ingest.ratio.value >= 0.5),
  },
  'raw data: server memory, 10^6-point upload, store off → on': {
    figure: `+${objectStore.storeOn.upload1M.growthMb} MB`, baseline: `store off +${objectStore.storeOff.upload1M.growthMb} MB`, ratio: '', goal: '', verdict: '',
  },
  'raw data: database bytes per 1,000-point acquisition, store off → on': {
    figure: `${objectStore.storeOn.databaseBytesPerAcquisition1kPoints.toLocaleString('en')} B`, baseline: `store off ${objectStore.storeOff.databaseBytesPerAcquisition1kPoints.toLocaleString('en')} B`,
    ratio: String((objectStore.storeOn.databaseBytesPerAcquisition1kPoints / objectStore.storeOff.databaseBytesPerAcquisition1kPoints).toFixed(2)), goal: '', verdict: '',
  },
  'raw data: database bytes for the 10^6-point upload, store off → on': {
    figure: `${objectStore.storeOn.databaseBytesFor1MUpload.toLocaleString('en')} B`, baseline: `store off ${objectStore.storeOff.databaseBytesFor1MUpload.toLocaleString('en')} B`, ratio: '', goal: '', verdict: '',
  },
  'ingest: server memory, 10^6-point upload': { figure: `+${ingest.upload1M.growthMb} MB`, baseline: `${ingest.upload1M.rssBeforeMb} MB before`, ratio: '', goal: '< 250 MB', verdict: met(ingest.upload1M.growthMb < 250) },
  'delivery: webhooks/s': {
    figure: `${delivery.worker.deliveriesPerSecond}/s`, baseline: `bare sender ${delivery.bareSender.requestsPerSecond}/s`, ratio: String(delivery.ratio.value), goal: '≥ 0.7', verdict: met(delivery.ratio.met),
  },
  'delivery: send path alone (no claim, no record)': {
    figure: `${delivery.sendPathOnly.requestsPerSecond}/s`, baseline: `bare sender ${delivery.bareSender.requestsPerSecond}/s`, ratio: String(delivery.sendPathOnly.ratioToBare), goal: '', verdict: '',
  },
  'delivery: peer, graphile-worker 0.16 (same messages, concurrency, database)': {
    figure: `${delivery.peer.deliveriesPerSecond}/s`, baseline: `Arcwise ${delivery.worker.deliveriesPerSecond}/s`, ratio: `Arcwise ${delivery.peer.arcwiseTimesPeer.value}×`, goal: '≥ 3×', verdict: met(delivery.peer.arcwiseTimesPeer.met),
  },
  'delivery: CPU of all processes per message': {
    figure: `worker ${delivery.cpuMicrosecondsPerMessage.worker} µs`, baseline: `bare ${delivery.cpuMicrosecondsPerMessage.bareSender} µs, send path ${delivery.cpuMicrosecondsPerMessage.sendPathOnly} µs, peer ${delivery.cpuMicrosecondsPerMessage.peer} µs`,
    ratio: String(delivery.cpuPerDeliveryToBare.value), goal: '≤ 2× bare', verdict: met(delivery.cpuPerDeliveryToBare.met),
  },
  'delivery: ingest answer to receipt, 200 events/s': {
    figure: `p50 ${delivery.latency.ms.p50} ms, p99 ${delivery.latency.ms.p99} ms`, baseline: '', ratio: '', goal: 'p99 < 250 ms', verdict: met(delivery.latency.met),
  },
  'fairness: 20 healthy endpoints, 200 events/s, with 10 s, hanging and 503 endpoints': {
    figure: `p50 ${fairness.withBadEndpoints.ms.p50} ms, p99 ${fairness.withBadEndpoints.ms.p99} ms (${fairness.withBadEndpoints.received}/${fairness.withBadEndpoints.events})`,
    baseline: `alone p99 ${fairness.alone.ms.p99} ms`, ratio: '', goal: 'p99 < 1 s', verdict: met(fairness.p99.met),
  },
  'fairness: worst healthy endpoint, p99 with the bad ones / alone': {
    figure: p99Text(fairness.worstEndpointP99Ratio.withBad), baseline: `alone ${p99Text(fairness.worstEndpointP99Ratio.alone)}`, ratio: String(fairness.worstEndpointP99Ratio.value), goal: '≤ 2', verdict: met(fairness.worstEndpointP99Ratio.met),
  },
  'ingest-to-receipt latency': { figure: `p50 ${latency.latencyMs.p50} ms, p99 ${latency.latencyMs.p99} ms`, baseline: '', ratio: '', goal: '', verdict: `${latency.received}/${latency.acquisitions} received` },
  'sequence: 200 acquisitions (1,000 points) end to end': { figure: `median ${sequence.medianMs} ms`, baseline: `runs ${sequence.runs.join(', ')} ms`, ratio: '', goal: '< 2 s', verdict: met(sequence.met) },
  'reprocess: 10,000 stored acquisitions (1,000 points)': { figure: `${reprocess.resultsPerSecond} results/s`, baseline: `${reprocess.seconds} s, ${reprocess.changed} changed`, ratio: '', goal: '', verdict: '' },
  'reprocess: server memory growth, 10,000 vs 1,000': {
    figure: `+${reprocess.memory.growthAtEndMb} MB`, baseline: `+${reprocess.memory.growthAt1000Mb} MB at 1,000`, ratio: `${reprocess.memory.differenceMb} MB more`, goal: '≤ 100 MB more', verdict: met(reprocess.memory.met),
  },
}
console.log(`\n  Arcwise benchmarks · ${machine.cores} cores · ${machine.cpu} · Node ${process.version} · ${report.versions.postgresql}`)
console.table(rows)
console.log(`  report: ${file}`)
