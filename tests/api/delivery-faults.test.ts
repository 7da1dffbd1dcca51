import type { ChildProcess } from 'node:child_process'
import { createServer } from 'node:http'
import { afterAll, afterEach, describe, expect, it } from 'vitest'
import { restartCluster } from '../../scripts/lib/pg'
import { bearer, co2Acquisition } from '../support/lab'
import { ConsoleClient, startAppProcess, testDb, unique, useArcwise } from '../support/server'
import { grantedPartnerWithEndpoint, until } from '../support/webhooks'

// Deliveries under real faults: worker processes killed with SIGKILL mid-batch, two workers
// sharing one queue, PostgreSQL restarted while deliveries are due. The server under test
// runs as `web` only; the deliveries are made by separate `worker` processes of the same build.

const SINK_PORT = 4191
const webhookEnv = {
  NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`,
  NUXT_WEBHOOKS_RETRY_SCHEDULE: '1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1',
  NUXT_WEBHOOKS_TIMEOUT_MS: '1000',
  NUXT_WEBHOOKS_LEASE_SECONDS: '2',
  NUXT_WEBHOOKS_CONCURRENCY: '4',
  NUXT_WEBHOOKS_POLL_MS: '200',
  // An endpoint's circuit (after 10 failures in a row) probes every 2 s rather than 30.
  NUXT_WEBHOOKS_CIRCUIT_PROBE_SECONDS: '2',
}
await useArcwise({ env: { ...webhookEnv, NUXT_PROCESS_ROLE: 'web' } })

const hits: { id: string, at: number }[] = []
let answer = 200
const sink = createServer((req, res) => {
  req.resume()
  req.on('end', () => {
    hits.push({ id: String(req.headers['webhook-id']), at: Date.now() })
    // A slow receiver, so that a kill lands in the middle of a batch.
    setTimeout(() => res.writeHead(answer).end(), 60)
  })
})
await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))

const workers: ChildProcess[] = []
let nextPort = 3160
/** A worker process with the file's webhook settings, and `env` over them. */
function startWorker(env: Record<string, string> = {}): ChildProcess {
  const child = startAppProcess(nextPort++, { ...webhookEnv, NUXT_PROCESS_ROLE: 'worker', ...env })
  workers.push(child)
  return child
}
afterEach(() => { for (const w of workers.splice(0)) w.kill('SIGKILL') })

/** A granted partner with one endpoint at the sink, and `n` accepted acquisitions owing it a delivery each. */
async function owedDeliveries(n: number) {
  const ctx = await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}/hook`)
  const endpoint = ctx.endpoint
  for (let i = 0; i < n; i++) {
    expect((await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 800), bearer(ctx.key.secret))).status).toBe(201)
  }
  const rows = await testDb()`select id from deliveries where endpoint_id = ${endpoint.id}`
  expect(rows).toHaveLength(n)
  const ids = new Set(rows.map(r => r.id as string))
  const tally = async () => {
    const [row] = await testDb()`select count(*) filter (where status = 'succeeded')::int as done, count(*) filter (where status = 'dead')::int as dead from deliveries where endpoint_id = ${endpoint.id}`
    return row as { done: number, dead: number }
  }
  return { ids, tally }
}

function received(ids: Set<string>) {
  const mine = hits.filter(h => ids.has(h.id))
  const distinct = new Set(mine.map(h => h.id))
  return { copies: mine.length, distinct }
}

describe('deliveries survive faults', () => {
  it('a worker killed with SIGKILL mid-batch loses nothing: another takes its deliveries when the leases run out', async () => {
    const { ids, tally } = await owedDeliveries(30)
    const first = startWorker()
    await until('the first worker to start sending', () => received(ids).copies >= 6)
    first.kill('SIGKILL')
    await new Promise(r => first.once('exit', r))
    const sentBeforeKill = received(ids).distinct.size
    expect(sentBeforeKill).toBeLessThan(30)
    startWorker()
    await until('every delivery to succeed', async () => (await tally()).done === 30, 90_000)
    const { distinct } = received(ids)
    // Lost: 0. Repeats (a message the killed worker sent but could not record) carry the same webhook-id.
    expect(distinct).toEqual(ids)
    expect((await tally()).dead).toBe(0)
  })

  it('two worker processes share one queue and send no delivery twice', async () => {
    const { ids, tally } = await owedDeliveries(40)
    startWorker()
    startWorker()
    await until('every delivery to succeed', async () => (await tally()).done === 40, 90_000)
    const { copies, distinct } = received(ids)
    expect(distinct).toEqual(ids)
    expect(copies).toBe(40)
    const [attempts] = await testDb()`select count(*)::int as n from delivery_attempts a join deliveries d on d.id = a.delivery_id where d.id = any(${[...ids]}::uuid[])`
    expect(attempts!.n).toBe(40)
  })

  it('a backlog larger than one claim drains from a single wake-up, without waiting for the next poll', async () => {
    // An endpoint has at most 16 deliveries leased (its in-flight limit), so this backlog of
    // 100 needs seven claims, each woken by the record before it; the poll is ten minutes away.
    const { ids, tally } = await owedDeliveries(100)
    await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}/idle`)
    const [active] = await testDb()`select count(*)::int as n from webhook_endpoints where status = 'active'`
    expect(active!.n).toBeGreaterThanOrEqual(2)
    startWorker({ NUXT_WEBHOOKS_CONCURRENCY: '16', NUXT_WEBHOOKS_POLL_MS: '600000' })
    await until('every delivery to succeed', async () => (await tally()).done === 100, 60_000)
    expect(received(ids).distinct).toEqual(ids)
  })

  it('PostgreSQL restarted while deliveries are due: every one still arrives', async () => {
    answer = 503
    const { ids, tally } = await owedDeliveries(12)
    startWorker()
    await until('failed attempts to be recorded', async () => {
      const [row] = await testDb()`select count(*)::int as n from deliveries where id = any(${[...ids]}::uuid[]) and attempts > 0`
      return row!.n >= 6
    })
    await restartCluster()
    answer = 200
    await until('every delivery to succeed', async () => (await tally()).done === 12, 90_000)
    expect(received(ids).distinct).toEqual(ids)
    // The web server came back too: it answers and reads the database.
    const admin = await new ConsoleClient().signIn('admin@arcwise.example', 'demo-admin-passphrase')
    expect((await admin.get('/api/console/partners')).status).toBe(200)
  })
})
