// `npm run bench:delivery`: webhook deliveries per second to a local sink that answers 200
// at once, beside a bare sender that posts the same signed bodies with the same concurrency
// (goal: at least 0.7 of the bare rate). Deliveries pile up behind paused endpoints, then
// the endpoints are resumed and the worker drains them. Prints one JSON object.
import { createServer } from 'node:http'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { readFileSync } from 'node:fs'
import { Agent, request } from 'undici'
import { buildIfStale } from './lib/build'
import { demoInstruments } from './lib/demo-instruments'
import { demoAdmin } from './lib/console-client'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const SINK_PORT = 3390
const base = `http://127.0.0.1:${PORT}`
const CONCURRENCY = 16

export async function benchDelivery(opts: { acquisitions?: number, endpoints?: number } = {}) {
  const acquisitionCount = opts.acquisitions ?? Number(process.env.BENCH_ACQUISITIONS ?? 300)
  const endpointCount = opts.endpoints ?? 10
  const received = new Map<string, { headers: Record<string, string>, body: string }>()
  let bareHits = 0
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      if (req.url === '/bare') bareHits++
      else received.set(String(req.headers['webhook-id']), { headers: Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])), body: Buffer.concat(chunks).toString() })
      res.writeHead(200).end()
    })
  })
  await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile })
  buildIfStale()
  const server = startServer({
    ...stack.serverEnv, NUXT_RATE_LIMIT_PER_MINUTE: '0', NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_CONCURRENCY: String(CONCURRENCY),
  }, PORT)
  try {
    await waitForServer(`${base}/api/health`)
    const keys = JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>
    const admin = await demoAdmin(base)
    const asAdmin = async <T>(method: string, path: string, body?: unknown) => (await admin.call<T>(method, path, body)).body
    const partner = await admin.partner('northgate-water')
    const endpoints: string[] = []
    for (let i = 0; i < endpointCount; i++) {
      const ep = await asAdmin<{ id: string }>('POST', `/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}/hook/${i}` })
      await asAdmin('PATCH', `/api/console/partners/${partner.id}/endpoints/${ep.id}`, { status: 'paused' })
      endpoints.push(ep.id)
    }
    // Acquisitions of a lab that grants the partner: each owes one delivery per endpoint.
    const inst = demoInstruments.find(i => i.lab === 'saltmarsh-isotopes')!
    const body = inst.acquisition('RUN', new Date(), 3)
    let next = 0
    await Promise.all(Array.from({ length: 8 }, async () => {
      while (next < acquisitionCount) {
        const n = next++
        const res = await fetch(`${base}/api/v1/acquisitions`, { method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${keys['saltmarsh-isotopes']}` }, body: JSON.stringify({ ...body, runId: `bench-delivery-${process.pid}-${n}` }) })
        if (res.status !== 201) throw new Error(`posting an acquisition answered ${res.status}`)
      }
    }))
    const owed = acquisitionCount * endpointCount
    const started = Date.now()
    for (const id of endpoints) await asAdmin('PATCH', `/api/console/partners/${partner.id}/endpoints/${id}`, { status: 'active' })
    const deadline = started + 300_000
    while (received.size < owed && Date.now() < deadline) await new Promise(r => setTimeout(r, 20))
    const workerSeconds = (Date.now() - started) / 1000
    // The bare sender: the same signed bodies, the same concurrency, straight from this process.
    const messages = [...received.values()]
    const agent = new Agent({ connections: 64 })
    let i = 0
    const bareStarted = Date.now()
    await Promise.all(Array.from({ length: CONCURRENCY }, async () => {
      while (i < messages.length) {
        const m = messages[i++]!
        const res = await request(`http://127.0.0.1:${SINK_PORT}/bare`, { method: 'POST', headers: m.headers, body: m.body, dispatcher: agent })
        await res.body.dump()
      }
    }))
    const bareSeconds = (Date.now() - bareStarted) / 1000
    await agent.close()
    const deliveryRate = received.size / workerSeconds
    const bareRate = bareHits / bareSeconds
    return {
      concurrency: CONCURRENCY, endpoints: endpointCount, deliveriesOwed: owed, delivered: received.size,
      worker: { seconds: Number(workerSeconds.toFixed(2)), deliveriesPerSecond: Math.round(deliveryRate) },
      bareSender: { seconds: Number(bareSeconds.toFixed(2)), requestsPerSecond: Math.round(bareRate) },
      ratio: { value: Number((deliveryRate / bareRate).toFixed(2)), goal: '>= 0.7' },
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
  log('delivery benchmark: this takes about a minute')
  const result = await benchDelivery()
  console.log(JSON.stringify({ benchmark: 'delivery', node: process.version, cores: cpus().length, ...result }, null, 2))
}
