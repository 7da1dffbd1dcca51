// Issue 23, point 3: the request id that posted an acquisition follows it into its deliveries.
// The file's own server is a web process (it delivers nothing), so every claim, send and
// record of this file's deliveries happens in the worker process started here, whose JSON log
// lines the test reads. Ports 3195–3196 and sink 4235 are this file's.
import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { createInterface } from 'node:readline'
import { url } from '@nuxt/test-utils/e2e'
import { afterAll, describe, expect, it } from 'vitest'
import { labAcquisitionView } from '../../shared/schemas/responses'
import { rootDir, testEnv } from '../support/env'
import { bearer, co2Acquisition } from '../support/lab'
import { testDb, unique, useArcwise } from '../support/server'
import { grantedPartnerWithEndpoint, recordingSink, until } from '../support/webhooks'

const SINK_PORT = 4235
const allowSink = { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}` }
await useArcwise({ env: { ...allowSink, NUXT_PROCESS_ROLE: 'web' } })

const children: ChildProcess[] = []
afterAll(() => { for (const c of children) c.kill('SIGKILL') })

type LogLine = Record<string, unknown>
/** One more process of the build whose JSON log lines are kept. */
function appWithLogs(port: number, env: Record<string, string>) {
  const child = spawn(process.execPath, [join(rootDir, '.output', 'server', 'index.mjs')], {
    env: { ...process.env, ...testEnv().serverEnv, ...allowSink, ...env, PORT: String(port), HOST: '127.0.0.1', NODE_ENV: 'production' },
    stdio: ['ignore', 'pipe', 'inherit'],
  })
  children.push(child)
  const lines: LogLine[] = []
  createInterface({ input: child.stdout! }).on('line', (line) => {
    try { lines.push(JSON.parse(line) as LogLine) }
    catch { /* Nitro's start-up banner is not JSON */ }
  })
  return { lines, base: `http://127.0.0.1:${port}` }
}

describe('a request id through ingest and delivery', () => {
  it('is kept with the acquisition, carried by every log line about it and its deliveries, shown to the lab, and never sent to the partner', async () => {
    const received = await recordingSink(SINK_PORT)
    const ctx = await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}/hooks`)
    const web = appWithLogs(3195, { NUXT_PROCESS_ROLE: 'web', NUXT_LOG_LEVEL: 'info' })
    const worker = appWithLogs(3196, { NUXT_PROCESS_ROLE: 'worker', NUXT_LOG_LEVEL: 'debug', NUXT_WEBHOOKS_POLL_MS: '200' })
    for (const p of [web, worker]) await until('the process to answer', async () => (await fetch(`${p.base}/livez`).catch(() => null))?.ok)

    const reqId = `lab-run.${unique('rid').replace(/[^\w.-]/g, '')}`.slice(0, 64)
    const body = co2Acquisition()
    const posted = await fetch(`${web.base}/api/v1/acquisitions`, { method: 'POST', headers: { ...bearer(ctx.key.secret), 'content-type': 'application/json', 'x-request-id': reqId }, body: JSON.stringify(body) })
    expect(posted.status).toBe(201)
    expect(posted.headers.get('x-request-id')).toBe(reqId)
    const acquisitionId = (await posted.json() as { id: string }).id

    // Processing: the ingest line names the acquisition and the request.
    const accepted = await until('the ingest log line', () => web.lines.find(l => l.msg === 'acquisition accepted' && l.acquisitionId === acquisitionId))
    expect(accepted).toMatchObject({ reqId, runId: body.runId, level: 'info', role: 'web' })

    // Delivery: the partner receives the result, and the worker's lines about it carry the id.
    const message = await until('the webhook message', () => received.find(m => (JSON.parse(m.body) as { data: { id: string } }).data.id === acquisitionId))
    const deliveryIds = (await testDb()<{ id: string }[]>`select d.id from deliveries d join events e on e.id = d.event_id where e.payload->>'id' = ${acquisitionId}`).map(r => r.id)
    expect(deliveryIds).toHaveLength(1)
    const about = await until('the record line', () => {
      const lines = worker.lines.filter(l => deliveryIds.includes(String(l.deliveryId)))
      return lines.some(l => l.msg === 'delivery recorded') && lines
    })
    expect(about.map(l => l.msg)).toEqual(['delivery claimed', 'delivery sent', 'delivery recorded'])
    for (const line of about) expect(line).toMatchObject({ reqId, deliveryId: deliveryIds[0], role: 'worker' })
    expect(about[2]).toMatchObject({ level: 'info', status: 'succeeded', class: 'success', statusCode: 200, attempt: 1 })

    // Partners do not see the hub's logs: neither the body nor a header carries the id.
    expect(message.body).not.toContain(reqId)
    expect(Object.values(message.headers).join(' ')).not.toContain(reqId)

    // The lab's API answer and the console's acquisition page data name it.
    const read = await fetch(url(`/api/v1/acquisitions/${acquisitionId}`), { headers: bearer(ctx.key.secret) })
    const view = labAcquisitionView.parse(await read.json())
    expect(view.requestId).toBe(reqId)
    const detail = await ctx.admin.get(`/api/console/labs/${ctx.lab.id}/acquisitions/${acquisitionId}`)
    expect(detail.body.requestId).toBe(reqId)
  })
})
