// `npm run bench:delivery`: webhook delivery, in two measures. Prints one JSON object.
//
// 1. Rate: deliveries per second to a local sink that answers 200 at once, beside a bare
//    sender that posts the same signed bodies with the same concurrency from this process
//    (goal: at least 0.7 of the bare rate). Deliveries pile up behind paused endpoints, then
//    the endpoints are resumed and the worker drains them. The sink does the same work for
//    both (it keeps every message it receives), and the CPU each process used is reported.
// 2. Latency: acquisitions posted open-loop at 200 a second to one endpoint; the time from
//    the ingest answer to the sink's receipt of the result, p50 and p99 (goal: p99 < 250 ms).
// Beside the rate, for the reader: the worker's send path alone (sign, guard, send, classify),
// run by the server with no claim and no record (`/_bench/send-loop`). What separates the
// worker from it is the durable queue; what separates it from the bare sender is the send path.
// And the peer, side by side: the same messages through graphile-worker 0.16, the usual
// PostgreSQL job queue on Node.js (scripts/lib/peer-queue.ts; goal: Arcwise at least 3 times
// its rate, and all processes' CPU per delivery at most twice the bare sender's).
import { createServer } from 'node:http'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { readFileSync } from 'node:fs'
import { setTimeout as sleep } from 'node:timers/promises'
import { Agent, request } from 'undici'
import { buildIfStale } from './lib/build'
import { cpuByProcess, cpuShares } from './lib/cpu'
import { demoInstruments, thousandPointAcquisition } from './lib/demo-instruments'
import { demoAdmin } from './lib/console-client'
import { noteArrival, openLoopLatency } from './lib/open-loop'
import { drainThroughPeer } from './lib/peer-queue'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startServer, startStack, waitForServer } from './lib/services'
import type { BenchSendLoop } from '../shared/schemas/webhooks'

const PORT = 3300
const SINK_PORT = 3390
const base = `http://127.0.0.1:${PORT}`
const CONCURRENCY = 16

interface Message { headers: Record<string, string>, body: string }


/** The measures `BENCH_DELIVERY_PARTS` (a comma list) asks for; all of them by default. */
const PARTS = ['rate', 'loop', 'peer', 'latency'] as const
function benchParts(): Set<(typeof PARTS)[number]> {
  const asked = process.env.BENCH_DELIVERY_PARTS?.split(',').map(p => p.trim()).filter(Boolean)
  const unknown = asked?.filter(p => !(PARTS as readonly string[]).includes(p))
  if (unknown?.length) throw new Error(`BENCH_DELIVERY_PARTS: unknown ${unknown.join(', ')} (known: ${PARTS.join(', ')})`)
  return new Set(asked?.length ? asked as (typeof PARTS)[number][] : PARTS)
}

export async function benchDelivery(opts: { acquisitions?: number, endpoints?: number, latencyRate?: number, latencySeconds?: number, parts?: Set<(typeof PARTS)[number]> } = {}) {
  const parts = opts.parts ?? new Set(PARTS)
  if ((parts.has('loop') || parts.has('peer')) && !parts.has('rate')) throw new Error('the send loop and the peer send the rate measure\'s messages: ask for rate too')
  const acquisitionCount = opts.acquisitions ?? Number(process.env.BENCH_ACQUISITIONS ?? 1000)
  const endpointCount = opts.endpoints ?? 10
  const latencyRate = opts.latencyRate ?? 200
  const latencySeconds = opts.latencySeconds ?? 5
  // What the sink received, by path: the worker's messages, the bare sender's, and for the
  // latency measure the moment each run's result arrived.
  const inbox = { worker: new Map<string, Message>(), bare: new Map<string, Message>(), loop: new Map<string, Message>(), peer: new Map<string, Message>() }
  const arrived = new Map<string, number>()
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      const body = Buffer.concat(chunks).toString()
      if (req.url === '/latency') {
        noteArrival(arrived, body)
      }
      else {
        const headers = Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)]))
        inbox[req.url === '/bare' ? 'bare' : req.url === '/loop' ? 'loop' : req.url === '/peer' ? 'peer' : 'worker'].set(headers['webhook-id']!, { headers, body })
      }
      res.writeHead(200).end()
    })
  })
  await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
  buildIfStale()
  const server = startServer({
    ...stack.serverEnv, NUXT_RATE_LIMIT_PER_MINUTE: '0', NUXT_BENCH_ROUTES: 'true', NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_CONCURRENCY: String(CONCURRENCY),
  }, PORT)
  try {
    await waitForServer(`${base}/api/health`)
    const keys = JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>
    const admin = await demoAdmin(base)
    const asAdmin = async <T>(method: string, path: string, body?: unknown) => (await admin.call<T>(method, path, body)).body
    const partner = await admin.partner('northgate-water')
    const endpointsPath = `/api/console/partners/${partner.id}/endpoints`
    const endpoints: string[] = []
    for (let i = 0; i < endpointCount; i++) {
      const ep = await asAdmin<{ id: string }>('POST', endpointsPath, { url: `http://127.0.0.1:${SINK_PORT}/hook/${i}` })
      await asAdmin('PATCH', `${endpointsPath}/${ep.id}`, { status: 'paused' })
      endpoints.push(ep.id)
    }
    const setStatus = (status: 'active' | 'paused') => Promise.all(endpoints.map(id => asAdmin('PATCH', `${endpointsPath}/${id}`, { status })))
    const post = (body: unknown) => fetch(`${base}/api/v1/acquisitions`, {
      method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${keys['saltmarsh-isotopes']}` }, body: JSON.stringify(body),
    }).then(async (res) => {
      await res.arrayBuffer()
      if (res.status !== 201) throw new Error(`posting an acquisition answered ${res.status}`)
    })

    const inst = demoInstruments.find(i => i.lab === 'saltmarsh-isotopes')!
    const owed = acquisitionCount * endpointCount
    // A measure left out (BENCH_DELIVERY_PARTS) reads NaN, printed as null.
    const none = { server: NaN, bench: NaN, postgres: NaN, other: NaN }
    let workerSeconds = NaN, workerCpu = none, bareSeconds = NaN, bareCpu = none, loopSeconds = NaN, loopCpu = none
    let peer = { seconds: NaN, cpu: none, recorded: 0 }
    let messages: Message[] = []
    if (parts.has('rate')) {
      // 1. Rate. Acquisitions of a lab that grants the partner: each owes one delivery per endpoint.
      const body = inst.acquisition('RUN', new Date(), 3)
      let next = 0
      await Promise.all(Array.from({ length: 8 }, async () => {
        while (next < acquisitionCount) await post({ ...body, runId: `bench-delivery-${process.pid}-${next++}` })
      }))
      const cpuBefore = cpuByProcess(server.pid!)
      const started = performance.now()
      await setStatus('active')
      const deadline = started + 300_000
      while (inbox.worker.size < owed && performance.now() < deadline) await sleep(5)
      workerSeconds = (performance.now() - started) / 1000
      workerCpu = cpuShares(cpuBefore, cpuByProcess(server.pid!), workerSeconds)

      // The bare sender: the same signed bodies, the same concurrency, straight from this process.
      messages = [...inbox.worker.values()]
      const agent = new Agent({ connections: 64 })
      let i = 0
      const bareCpuBefore = cpuByProcess(server.pid!)
      const bareStarted = performance.now()
      await Promise.all(Array.from({ length: CONCURRENCY }, async () => {
        while (i < messages.length) {
          const m = messages[i++]!
          const res = await request(`http://127.0.0.1:${SINK_PORT}/bare`, { method: 'POST', headers: m.headers, body: m.body, dispatcher: agent })
          await res.body.dump()
        }
      }))
      bareSeconds = (performance.now() - bareStarted) / 1000
      bareCpu = cpuShares(bareCpuBefore, cpuByProcess(server.pid!), bareSeconds)
      await agent.close()
      await setStatus('paused')
    }

    if (parts.has('loop')) {
      // The worker's send path alone, in the server: as many messages, the same body and concurrency.
      const loopCpuBefore = cpuByProcess(server.pid!)
      const loopStarted = performance.now()
      const loop: BenchSendLoop = { url: `http://127.0.0.1:${SINK_PORT}/loop`, count: messages.length, concurrency: CONCURRENCY, body: messages[0]!.body }
      const loopAnswer = await fetch(`${base}/_bench/send-loop`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(loop) })
      if (!loopAnswer.ok) throw new Error(`the send loop answered ${loopAnswer.status}: ${await loopAnswer.text()}`)
      const { classes } = await loopAnswer.json() as { classes: Record<string, number> }
      if (classes.success !== loop.count) throw new Error(`the send loop's sends did not all succeed: ${JSON.stringify(classes)}`)
      loopSeconds = (performance.now() - loopStarted) / 1000
      loopCpu = cpuShares(loopCpuBefore, cpuByProcess(server.pid!), loopSeconds)
    }

    if (parts.has('peer')) {
      // The peer: graphile-worker with the same messages, concurrency and database.
      peer = await drainThroughPeer({
        databaseUrl: stack.databaseUrl, url: `http://127.0.0.1:${SINK_PORT}/peer`, messages, concurrency: CONCURRENCY, received: () => inbox.peer.size, serverPid: server.pid!,
      })
      if (peer.recorded !== messages.length) throw new Error(`the peer recorded ${peer.recorded} of ${messages.length} attempts`)
    }
    const loopRate = inbox.loop.size / loopSeconds
    const peerRate = inbox.peer.size / peer.seconds
    const deliveryRate = inbox.worker.size / workerSeconds
    const bareRate = inbox.bare.size / bareSeconds
    const ratio = Number((deliveryRate / bareRate).toFixed(2))
    // CPU time of all processes per message: less at the mercy of this machine's noise than
    // the rates, since a slow moment slows both the work and its clock.
    // The processes a delivery involves: the server, this process (sink, bare sender and the
    // peer queue all run here) and PostgreSQL. "other" is whatever else shares the machine
    // (another session's build counted up to 135 % of a core) and is left out.
    const perMessage = (shares: Record<'server' | 'bench' | 'postgres' | 'other', number>, seconds: number, count: number) =>
      Math.round((shares.server + shares.bench + shares.postgres) / 100 * seconds / count * 1e6)

    let timed = { postedPerSecond: NaN, received: 0, ms: { p50: NaN, p99: NaN } as Awaited<ReturnType<typeof openLoopLatency>>['ms'] }
    const template = thousandPointAcquisition(inst, 'x')
    const count = latencyRate * latencySeconds
    if (parts.has('latency')) {
      // 2. Latency, at a steady rate to one endpoint (the rate measure's endpoints paused), with
      // 1,000-point acquisitions: the 12,000-point ones cannot be ingested 200 times a second here.
      await asAdmin('POST', endpointsPath, { url: `http://127.0.0.1:${SINK_PORT}/latency` })
      for (let w = 0; w < 20; w++) await post({ ...template, runId: `lat-warm-${process.pid}-${w}` })
      // Timed from the moment each post is answered.
      timed = await openLoopLatency({ count, rate: latencyRate, runIdPrefix: `lat-${process.pid}`, arrived, send: async (runId) => {
        await post({ ...template, runId })
        return performance.now()
      } })
    }

    return {
      concurrency: CONCURRENCY, endpoints: endpointCount, deliveriesOwed: owed, delivered: inbox.worker.size,
      worker: { seconds: Number(workerSeconds.toFixed(2)), deliveriesPerSecond: Math.round(deliveryRate), cpuPercent: workerCpu },
      bareSender: { seconds: Number(bareSeconds.toFixed(2)), requestsPerSecond: Math.round(bareRate), cpuPercent: bareCpu },
      ratio: { value: ratio, goal: '>= 0.7', met: ratio >= 0.7 },
      sendPathOnly: { seconds: Number(loopSeconds.toFixed(2)), requestsPerSecond: Math.round(loopRate), cpuPercent: loopCpu, ratioToBare: Number((loopRate / bareRate).toFixed(2)) },
      peer: {
        queue: 'graphile-worker 0.16.6', seconds: Number(peer.seconds.toFixed(2)), deliveriesPerSecond: Math.round(peerRate), cpuPercent: peer.cpu, ratioToBare: Number((peerRate / bareRate).toFixed(2)),
        arcwiseTimesPeer: { value: Number((deliveryRate / peerRate).toFixed(2)), goal: '>= 3', met: deliveryRate / peerRate >= 3 },
      },
      cpuMicrosecondsPerMessage: {
        worker: perMessage(workerCpu, workerSeconds, inbox.worker.size), bareSender: perMessage(bareCpu, bareSeconds, inbox.bare.size), sendPathOnly: perMessage(loopCpu, loopSeconds, inbox.loop.size),
        peer: perMessage(peer.cpu, peer.seconds, inbox.peer.size),
      },
      cpuPerDeliveryToBare: {
        value: Number((perMessage(workerCpu, workerSeconds, inbox.worker.size) / perMessage(bareCpu, bareSeconds, inbox.bare.size)).toFixed(2)), goal: '<= 2',
        met: perMessage(workerCpu, workerSeconds, inbox.worker.size) <= 2 * perMessage(bareCpu, bareSeconds, inbox.bare.size),
      },
      latency: {
        eventsPerSecond: latencyRate, postedPerSecond: timed.postedPerSecond, events: count, received: timed.received, points: template.sweep!.values.length,
        ms: timed.ms, goal: 'p99 < 250 ms', met: timed.received === count && timed.ms.p99 < 250,
      },
    }
  }
  finally {
    server.kill('SIGTERM')
    await new Promise(resolve => server.once('exit', resolve))
    await stack.stop()
    await new Promise<void>(resolve => sink.close(() => resolve()))
  }
}

if (import.meta.url === `file://${process.argv[1]}`) {
  log('delivery benchmark: this takes about two minutes')
  const result = await benchDelivery({ parts: benchParts() })
  console.log(JSON.stringify({ benchmark: 'delivery', node: process.version, cores: cpus().length, ...result }, null, 2))
}
