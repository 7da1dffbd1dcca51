// A delivery committed for an endpoint just after the worker disabled it must not wait
// forever. `npm run chaos` (100,000 deliveries, 2026-12-03) found one: ingest's fan-out read
// the "never" endpoint as active in its snapshot while the worker disabled it and marked its
// waiting deliveries dead; the fan-out's insert committed a moment later, pending for an
// endpoint no claim reads. The file's own server is a web process; the worker process started
// here (port 3197) is the one that must find such rows.
import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { afterAll, describe, expect, it } from 'vitest'
import { rootDir, testEnv } from '../support/env'
import { labWithInstrument } from '../support/lab'
import { testDb, unique, useArcwise } from '../support/server'
import { insertPausedEndpoint, until } from '../support/webhooks'

await useArcwise({ env: { NUXT_PROCESS_ROLE: 'web' } })

const children: ChildProcess[] = []
afterAll(() => { for (const c of children) c.kill('SIGKILL') })

describe('deliveries of a disabled endpoint', () => {
  it('are made dead by the worker even when they were committed after the endpoint was disabled, while a paused endpoint keeps its own', async () => {
    const { admin } = await labWithInstrument()
    const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Late Partner', kind: 'data_team', contactEmail: 'late@example.org' })).body
    const sql = testDb()
    const disabled = await insertPausedEndpoint(partner.id, 'https://receiver.example.org/disabled')
    const paused = await insertPausedEndpoint(partner.id, 'https://receiver.example.org/paused')
    await sql`update webhook_endpoints set status = 'disabled', disabled_reason = 'no delivery succeeded for 72 hours' where id = ${disabled}`
    // The late rows, as the fan-out's insert leaves them: pending, never attempted.
    const [late] = await sql<{ id: string }[]>`insert into deliveries (endpoint_id, event_type, test_payload) values (${disabled}, 'webhook.test', ${sql.json({ late: true })}) returning id`
    const [held] = await sql<{ id: string }[]>`insert into deliveries (endpoint_id, event_type, test_payload) values (${paused}, 'webhook.test', ${sql.json({ held: true })}) returning id`

    const worker = spawn(process.execPath, [join(rootDir, '.output', 'server', 'index.mjs')], {
      env: { ...process.env, ...testEnv().serverEnv, NUXT_PROCESS_ROLE: 'worker', PORT: '3197', HOST: '127.0.0.1', NODE_ENV: 'production' },
      stdio: 'ignore',
    })
    children.push(worker)
    const row = await until('the late delivery to be dead', async () => {
      const [r] = await sql<{ status: string, finished_at: Date | null, attempts: number }[]>`select status, finished_at, attempts from deliveries where id = ${late!.id}`
      return r?.status === 'dead' && r
    }, 30_000)
    expect(row.finished_at).toBeInstanceOf(Date)
    expect(row.attempts).toBe(0)
    const [kept] = await sql<{ status: string }[]>`select status from deliveries where id = ${held!.id}`
    expect(kept!.status).toBe('pending')
  })
})
