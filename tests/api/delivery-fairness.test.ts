import type { ChildProcess } from 'node:child_process'
import { createServer, type ServerResponse } from 'node:http'
import { afterAll, afterEach, describe, expect, it } from 'vitest'
import { bearer, co2Acquisition } from '../support/lab'
import { ConsoleClient, startAppProcess, testDb, unique, useArcwise } from '../support/server'
import { grantedPartnerWithEndpoint, until } from '../support/webhooks'

// One slow partner must not delay the others (issue 22): per-endpoint limits on sends in
// flight, held across worker processes; Retry-After and the circuit slow only the endpoint
// that asked or failed; ordered endpoints get one delivery at a time, in order. The server
// under test runs as `web` only; deliveries are made by `worker` processes of the same build.

const SINK_PORT = 4192
const webhookEnv = {
  NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`,
  NUXT_WEBHOOKS_RETRY_SCHEDULE: '1,1,1,1,1,1,1,1,1,1',
  NUXT_WEBHOOKS_TIMEOUT_MS: '30000',
  NUXT_WEBHOOKS_POLL_MS: '200',
  // Few enough send slots that one endpoint without a limit could take them all.
  NUXT_WEBHOOKS_CONCURRENCY: '24',
  NUXT_WEBHOOKS_ENDPOINT_IN_FLIGHT: '16',
  NUXT_WEBHOOKS_CIRCUIT_FAILURES: '3',
  NUXT_WEBHOOKS_CIRCUIT_PROBE_SECONDS: '2',
}
await useArcwise({ env: { ...webhookEnv, NUXT_PROCESS_ROLE: 'web' } })

interface Hit { path: string, id: string, sequence: number, at: number }
const hits: Hit[] = []
// Requests to a held path stay unanswered until released; open counts what is unanswered now.
const held = new Map<string, ServerResponse[]>()
const open = new Map<string, number>()
const mostOpen = new Map<string, number>()
const answers = new Map<string, () => { status: number, headers?: Record<string, string> }>()
const sink = createServer((req, res) => {
  const chunks: Buffer[] = []
  req.on('data', c => chunks.push(c as Buffer))
  req.on('end', () => {
    const path = req.url!
    const body = JSON.parse(Buffer.concat(chunks).toString()) as { data: { sequence: number } }
    hits.push({ path, id: String(req.headers['webhook-id']), sequence: body.data.sequence, at: Date.now() })
    open.set(path, (open.get(path) ?? 0) + 1)
    mostOpen.set(path, Math.max(mostOpen.get(path) ?? 0, open.get(path)!))
    res.on('close', () => open.set(path, open.get(path)! - 1))
    const list = held.get(path)
    if (list) return list.push(res)
    const answer = answers.get(path)?.() ?? { status: 200 }
    res.writeHead(answer.status, answer.headers).end('received')
  })
})
await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))

const hitsTo = (path: string) => hits.filter(h => h.path === path)
const distinct = (path: string) => new Set(hitsTo(path).map(h => h.id)).size
/** Answers the held requests to `path`; later ones are held again unless `stopHolding`. */
function release(path: string, stopHolding = false) {
  for (const res of held.get(path)?.splice(0) ?? []) res.writeHead(200).end('received')
  if (stopHolding) held.delete(path)
}

const workers: ChildProcess[] = []
let nextPort = 3170
function startWorker(): ChildProcess {
  const child = startAppProcess(nextPort++, { ...webhookEnv, NUXT_PROCESS_ROLE: 'worker' })
  workers.push(child)
  return child
}
afterEach(() => {
  for (const path of [...held.keys()]) release(path, true)
  for (const w of workers.splice(0)) w.kill('SIGKILL')
})

/** A granted partner whose first endpoint is at `path` (with `extra` settings), and a poster of acquisitions for its lab. */
async function partner(path: string, extra: Record<string, unknown> = {}) {
  const ctx = await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}${path}`, extra)
  const addEndpoint = async (more: string, settings: Record<string, unknown> = {}) =>
    (await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${more}`, ...settings })).body as { id: string }
  const post = async (n: number) => {
    for (let i = 0; i < n; i++) expect((await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 600), bearer(ctx.key.secret))).status).toBe(201)
  }
  return { ...ctx, addEndpoint, post }
}

describe('per-endpoint fairness', () => {
  it('a hanging endpoint fills its own slots only: the healthy endpoint of the same partner gets every delivery meanwhile', async () => {
    const slow = `/slow-${unique('x')}`
    const healthy = `/healthy-${unique('x')}`
    held.set(slow, [])
    const ctx = await partner(slow)
    await ctx.addEndpoint(healthy)
    await ctx.post(40)
    startWorker()
    await until('every healthy delivery', () => distinct(healthy) === 40, 60_000)
    // All the while the slow endpoint's 16 slots were full and none of its messages answered.
    expect(open.get(slow)).toBe(16)
    expect(mostOpen.get(slow)).toBe(16)
    expect(hitsTo(slow)).toHaveLength(16)
    // Answered a few at a time, it gets the rest, never more than 16 at once.
    const drain = setInterval(() => release(slow), 300)
    await until('every slow delivery', () => distinct(slow) === 40, 60_000).finally(() => clearInterval(drain))
    expect(mostOpen.get(slow)).toBe(16)
  })

  it('an endpoint\'s in-flight limit holds across two worker processes', async () => {
    const slow = `/limited-${unique('x')}`
    held.set(slow, [])
    const ctx = await partner(slow, { maxInFlight: 5 })
    await ctx.post(30)
    startWorker()
    startWorker()
    await until('the endpoint\'s five slots to fill', () => open.get(slow) === 5, 30_000)
    // Both workers poll every 200 ms meanwhile; neither takes a sixth.
    await new Promise(r => setTimeout(r, 2500))
    expect(mostOpen.get(slow)).toBe(5)
    const [leased] = await testDb()`select count(*)::int as n from deliveries where endpoint_id = ${ctx.endpoint.id} and lease_until > now()`
    expect(leased!.n).toBe(5)
    const drain = setInterval(() => release(slow), 200)
    await until('every delivery', () => distinct(slow) === 30, 60_000).finally(() => clearInterval(drain))
    release(slow, true)
    expect(mostOpen.get(slow)).toBe(5)
    // Each delivered once: 30 messages, 30 recorded attempts.
    expect(hitsTo(slow)).toHaveLength(30)
    await until('every attempt recorded', async () => {
      const [row] = await testDb()`select count(*)::int as n from deliveries where endpoint_id = ${ctx.endpoint.id} and status = 'succeeded'`
      return row!.n === 30
    })
    const [attempts] = await testDb()`select count(*)::int as n from delivery_attempts a join deliveries d on d.id = a.delivery_id where d.endpoint_id = ${ctx.endpoint.id}`
    expect(attempts!.n).toBe(30)
  })

  it('ordered delivery keeps the lab\'s order across a failure: the next waits until the one before succeeds', async () => {
    const path = `/ordered-${unique('x')}`
    let calls = 0
    // The second message fails twice before it is taken.
    answers.set(path, () => ++calls === 2 || calls === 3 ? { status: 500 } : { status: 200 })
    const ctx = await partner(path, { ordered: true })
    expect(ctx.endpoint.ordered).toBe(true)
    await ctx.post(6)
    startWorker()
    await until('every delivery', async () => {
      const [row] = await testDb()`select count(*)::int as n from deliveries where endpoint_id = ${ctx.endpoint.id} and status = 'succeeded'`
      return row!.n === 6
    }, 60_000)
    const seen = hitsTo(path).map(h => h.sequence)
    const first = seen[0]!
    expect(seen).toEqual([first, first + 1, first + 1, first + 1, first + 2, first + 3, first + 4, first + 5])
    expect(mostOpen.get(path)).toBe(1)
  })

  it('Retry-After on a 429 holds back the endpoint\'s other deliveries, and only that endpoint\'s', async () => {
    const path = `/throttled-${unique('x')}`
    const other = `/other-${unique('x')}`
    let calls = 0
    answers.set(path, () => ++calls === 1 ? { status: 429, headers: { 'retry-after': '3' } } : { status: 200 })
    const ctx = await partner(path, { maxInFlight: 1 })
    await ctx.addEndpoint(other)
    await ctx.post(4)
    startWorker()
    await until('every delivery to both', () => distinct(path) === 4 && distinct(other) === 4, 60_000)
    const [throttled, next] = hitsTo(path)
    expect(next!.at - throttled!.at).toBeGreaterThanOrEqual(2900)
    // The other endpoint was not held back.
    expect(Math.max(...hitsTo(other).map(h => h.at)) - throttled!.at).toBeLessThan(2500)
  })

  it('a rate limit spreads an endpoint\'s sends over time', async () => {
    const path = `/paced-${unique('x')}`
    const ctx = await partner(path, { ratePerSecond: 4 })
    await ctx.post(16)
    startWorker()
    await until('every delivery', () => distinct(path) === 16, 60_000)
    const times = hitsTo(path).map(h => h.at)
    // A burst of one second's sends (4), then 4 a second: 12 more take about 3 s.
    expect(Math.max(...times) - Math.min(...times)).toBeGreaterThanOrEqual(2500)
  })

  it('after N failures in a row the circuit opens: one probe at a time until a success, then the backlog', async () => {
    const path = `/broken-${unique('x')}`
    let failing = true
    answers.set(path, () => ({ status: failing ? 503 : 200 }))
    const ctx = await partner(path)
    await ctx.post(8)
    startWorker()
    await until('the circuit to open', async () => {
      const { items } = (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/endpoints`)).body as { items: { id: string, consecutiveFailures: number, blockedUntil: string | null }[] }
      const ep = items.find(e => e.id === ctx.endpoint.id)!
      return ep.consecutiveFailures >= 3 && ep.blockedUntil !== null
    }, 30_000)
    const opened = hitsTo(path).length
    await until('two probes', () => hitsTo(path).length >= opened + 2, 30_000)
    const probes = hitsTo(path).slice(opened)
    // One at a time, a probe interval (2 s) apart, though the deliveries' own retries (1 s) are due.
    expect(probes[1]!.at - probes[0]!.at).toBeGreaterThanOrEqual(1900)
    expect(mostOpen.get(path)).toBeLessThanOrEqual(8)
    failing = false
    await until('the backlog after a successful probe', async () => {
      const [row] = await testDb()`select count(*)::int as n from deliveries where endpoint_id = ${ctx.endpoint.id} and status = 'succeeded'`
      return row!.n === 8
    }, 30_000)
  })

  it('refuses limits past the hub\'s bounds with a problem naming the field, and stores nothing', async () => {
    const ctx = await partner(`/checked-${unique('x')}`)
    const path = `/api/console/partners/${ctx.partner.id}/endpoints`
    const url = `http://127.0.0.1:${SINK_PORT}/x`
    const count = async () => (await testDb()`select count(*)::int as n from webhook_endpoints where partner_id = ${ctx.partner.id}`)[0]!.n as number
    const before = await count()
    for (const [body, field] of [
      [{ url, maxInFlight: 65 }, 'maxInFlight'], [{ url, maxInFlight: 0 }, 'maxInFlight'], [{ url, maxInFlight: 2.5 }, 'maxInFlight'],
      [{ url, ratePerSecond: 201 }, 'ratePerSecond'], [{ url, ratePerSecond: 0 }, 'ratePerSecond'], [{ url, ordered: 'yes' }, 'ordered'],
    ] as const) {
      const res = await ctx.admin.post(path, body)
      expect(res.status, JSON.stringify(body)).toBe(422)
      expect(res.headers.get('content-type')).toMatch(/application\/problem\+json/)
      expect((res.body as { errors: { path: string }[] }).errors.map(e => e.path)).toContain(field)
    }
    expect(await count()).toBe(before)
    const patch = await ctx.admin.request('PATCH', `${path}/${ctx.endpoint.id}`, { maxInFlight: 1000 })
    expect(patch.status).toBe(422)
    expect((patch.body as { errors: { path: string }[] }).errors.map(e => e.path)).toEqual(['maxInFlight'])
    const [row] = await testDb()`select max_in_flight from webhook_endpoints where id = ${ctx.endpoint.id}`
    expect(row!.max_in_flight).toBeNull()
    const ok = await ctx.admin.request('PATCH', `${path}/${ctx.endpoint.id}`, { maxInFlight: 64, ratePerSecond: 12.5, ordered: true })
    expect(ok.status).toBe(200)
    expect(ok.body).toMatchObject({ maxInFlight: 64, ratePerSecond: 12.5, ordered: true })
  })
})
