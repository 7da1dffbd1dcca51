import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { createInterface } from 'node:readline'
import { url } from '@nuxt/test-utils/e2e'
import { afterAll, describe, expect, it } from 'vitest'
import { rootDir, testEnv } from '../support/env'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise()

// Issue 23, point 3: what an operator watches. Ports 3180–3189 are this file's.
const children: ChildProcess[] = []
afterAll(() => { for (const c of children) c.kill('SIGKILL') })

/** One more built server whose JSON log lines this test reads. */
function appWithLogs(port: number, env: Record<string, string>) {
  const child = spawn(process.execPath, [join(rootDir, '.output', 'server', 'index.mjs')], {
    env: { ...process.env, ...testEnv().serverEnv, ...env, PORT: String(port), HOST: '127.0.0.1', NODE_ENV: 'production' },
    stdio: ['ignore', 'pipe', 'inherit'],
  })
  children.push(child)
  const lines: Record<string, unknown>[] = []
  createInterface({ input: child.stdout! }).on('line', (line) => {
    try { lines.push(JSON.parse(line)) }
    catch { /* Nitro's start-up banner is not JSON */ }
  })
  return { child, lines, base: `http://127.0.0.1:${port}` }
}

async function until<T>(probe: () => Promise<T | undefined> | T | undefined, timeoutMs = 20_000): Promise<T> {
  const end = Date.now() + timeoutMs
  for (;;) {
    try { const v = await probe(); if (v !== undefined) return v }
    catch { /* not up yet */ }
    if (Date.now() > end) throw new Error('timed out')
    await new Promise(r => setTimeout(r, 100))
  }
}

const metricsToken = () => testEnv().serverEnv.NUXT_METRICS_TOKEN!

describe('operability', () => {
  it('answers liveness and readiness, and readiness fails (503, naming the database) while liveness holds when PostgreSQL is away', async () => {
    const live = await fetch(url('/livez'))
    expect(live.status).toBe(200)
    const ready = await fetch(url('/readyz'))
    expect(ready.status).toBe(200)
    expect((await ready.json()).checks.database.ok).toBe(true)

    // A process pointed at a port where no PostgreSQL listens.
    const cut = appWithLogs(3181, { NUXT_DATABASE_URL: 'postgres://arcwise:x@127.0.0.1:9/arcwise', NUXT_PROCESS_ROLE: 'web', NUXT_LOG_LEVEL: 'warn' })
    const down = await until(async () => { const r = await fetch(`${cut.base}/readyz`); return r.status ? r : undefined })
    expect(down.status).toBe(503)
    expect(down.headers.get('content-type')).toContain('application/problem+json')
    expect(down.headers.get('retry-after')).toBe('5')
    expect((await down.json()).detail).toMatch(/^database: /)
    expect((await fetch(`${cut.base}/livez`)).status).toBe(200)
  })

  it('serves Prometheus metrics only with the token: ingest counts by outcome, engine time, queue depth and age, database connections', async () => {
    const bare = await fetch(url('/metrics'))
    expect(bare.status).toBe(401)
    expect(bare.headers.get('www-authenticate')).toContain('Bearer')
    expect((await fetch(url('/metrics'), { headers: { authorization: 'Bearer wrong' } })).status).toBe(401)

    const { key } = await labWithInstrument()
    const lab = new ConsoleClient()
    const body = co2Acquisition()
    expect((await lab.request('POST', '/api/v1/acquisitions', body, bearer(key.secret))).status).toBe(201)
    expect((await lab.request('POST', '/api/v1/acquisitions', { ...body, acquiredAt: 'not a time' }, bearer(key.secret))).status).toBe(422)

    const res = await fetch(url('/metrics'), { headers: { authorization: `Bearer ${metricsToken()}` } })
    expect(res.status).toBe(200)
    expect(res.headers.get('content-type')).toContain('text/plain')
    const text = await res.text()
    const value = (series: string) => Number(text.split('\n').find(l => l.startsWith(`${series} `))?.split(' ')[1] ?? Number.NaN)
    expect(value('arcwise_acquisitions_total{outcome="accepted"}')).toBeGreaterThanOrEqual(1)
    expect(value('arcwise_acquisitions_total{outcome="refused"}')).toBeGreaterThanOrEqual(1)
    expect(value('arcwise_engine_duration_seconds_count{mode="sweep"}')).toBeGreaterThanOrEqual(1)
    expect(value('arcwise_delivery_queue{state="pending"}')).toBeGreaterThanOrEqual(0)
    expect(value('arcwise_delivery_queue_oldest_age_seconds{state="due"}')).toBeGreaterThanOrEqual(0)
    expect(value('arcwise_database_connections{state="active"}')).toBeGreaterThanOrEqual(1)
    expect(text).toContain('arcwise_http_request_duration_seconds_bucket{le="0.1",group="ingest",method="POST",status="2xx"}')
    expect(value('arcwise_process_resident_memory_bytes')).toBeGreaterThan(0)
  })

  it('names every request: a sane X-Request-Id is kept, anything else replaced, and the JSON log line carries it', async () => {
    const kept = await fetch(url('/api/v1/schemas'), { headers: { 'x-request-id': 'lab-run.42_a' } })
    expect(kept.headers.get('x-request-id')).toBe('lab-run.42_a')
    const replaced = await fetch(url('/api/v1/schemas'), { headers: { 'x-request-id': 'two words' } })
    expect(replaced.headers.get('x-request-id')).toMatch(/^[0-9a-f-]{36}$/)
    const long = await fetch(url('/api/v1/schemas'), { headers: { 'x-request-id': 'x'.repeat(65) } })
    expect(long.headers.get('x-request-id')).toHaveLength(36)

    const app = appWithLogs(3182, { NUXT_PROCESS_ROLE: 'web', NUXT_LOG_LEVEL: 'info' })
    await until(async () => (await fetch(`${app.base}/livez`)).ok || undefined)
    await fetch(`${app.base}/api/v1/schemas?secret=shh`, { headers: { 'x-request-id': 'trace-me-7' } })
    const line = await until(() => app.lines.find(l => l.reqId === 'trace-me-7'))
    expect(line).toMatchObject({ level: 'info', msg: 'request', method: 'GET', path: '/api/v1/schemas', status: 200, role: 'web' })
    expect(typeof line.time).toBe('string')
    // The query string (which may hold a token) is never logged.
    expect(JSON.stringify(app.lines)).not.toContain('shh')
  })
})
