// Ingest-to-receipt latency: from the moment a lab system starts posting an acquisition to
// the moment the partner's webhook receiver has the signed result. Acquisitions are posted
// open-loop at a steady rate (not one after another), as lab systems do, to a server whose
// delivery worker runs in the same process. Prints one JSON object.
import { createServer } from 'node:http'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { readFileSync } from 'node:fs'
import { buildIfStale } from './lib/build'
import { demoInstruments } from './lib/demo-instruments'
import { demoAdmin } from './lib/console-client'
import { noteArrival, openLoopLatency } from './lib/open-loop'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const SINK_PORT = 3391
const base = `http://127.0.0.1:${PORT}`

export async function benchLatency(opts: { count?: number, ratePerSecond?: number } = {}) {
  const count = opts.count ?? 300
  const rate = opts.ratePerSecond ?? 20
  const arrived = new Map<string, number>()
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      noteArrival(arrived, Buffer.concat(chunks).toString())
      res.writeHead(200).end()
    })
  })
  await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
  buildIfStale()
  const server = startServer({ ...stack.serverEnv, NUXT_RATE_LIMIT_PER_MINUTE: '0', NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}` }, PORT)
  try {
    await waitForServer(`${base}/api/health`)
    const keys = JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>
    const admin = await demoAdmin(base)
    const partner = await admin.partner('northgate-water')
    await admin.call('POST', `/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}/hook` })
    // The demo carbonate bench's acquisitions as its lab system sends them (12,000 points).
    const inst = demoInstruments.find(i => i.slug === 'irms-north')!
    const body = inst.acquisition('x', new Date(), 2)
    const post = (runId: string) => fetch(`${base}/api/v1/acquisitions`, {
      method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${keys['saltmarsh-isotopes']}` }, body: JSON.stringify({ ...body, runId }),
    }).then(async (r) => { await r.arrayBuffer(); if (r.status !== 201) throw new Error(`posting answered ${r.status}`) })
    for (let i = 0; i < 10; i++) await post(`warm-${process.pid}-${i}`) // JIT and connection pools
    // Timed from the start of each post.
    const timed = await openLoopLatency({ count, rate, runIdPrefix: `lat-${process.pid}`, arrived, send: async (runId) => {
      const at = performance.now()
      await post(runId)
      return at
    } })
    return {
      acquisitions: count, ratePerSecond: rate, points: body.sweep!.values.length, received: timed.received, latencyMs: timed.ms,
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
  log('ingest-to-receipt latency benchmark: this takes about half a minute')
  console.log(JSON.stringify({ benchmark: 'latency', node: process.version, cores: cpus().length, ...await benchLatency() }, null, 2))
}
