import { createServer } from 'node:http'
import { url } from '@nuxt/test-utils/e2e'
import { Webhook } from 'standardwebhooks'
import { afterAll, describe, expect, it } from 'vitest'
import { acquisitionView } from '../../shared/schemas/responses'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition } from '../support/lab'
import { ConsoleClient, unique, useArcwise, waitForMail } from '../support/server'
import { grantedPartnerWithEndpoint, until } from '../support/webhooks'

// Limits of webhook delivery, with the server configured small: messages over 1 KiB are sent
// thin, and an endpoint failing for 2 seconds (0.0005 h) without a success is disabled.

const SINK_PORT = 4192
await useArcwise({ env: {
  NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`,
  NUXT_WEBHOOKS_RETRY_SCHEDULE: '1,1,1,1,1,1,1,1,1,1',
  NUXT_WEBHOOKS_MAX_PAYLOAD_BYTES: '1024',
  NUXT_WEBHOOKS_DISABLE_AFTER_HOURS: '0.0005',
  NUXT_WEBHOOKS_POLL_MS: '200',
} })

const hits: { path: string, headers: Record<string, string>, body: string }[] = []
const sink = createServer((req, res) => {
  const chunks: Buffer[] = []
  req.on('data', c => chunks.push(c as Buffer))
  req.on('end', () => {
    hits.push({ path: req.url!, headers: Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])), body: Buffer.concat(chunks).toString() })
    res.writeHead(req.url!.startsWith('/down') ? 500 : 200).end()
  })
})
await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))

const setUp = (path: string) => grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}${path}`)

describe('webhook limits', () => {
  it('sends a message over the size limit thin, never truncated: the summary and a URL a partner token can fetch', async () => {
    const path = `/thin-${unique('x')}`
    const ctx = await setUp(path)
    const accepted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 1500), bearer(ctx.key.secret))
    expect(accepted.status).toBe(201)
    const hit = await until('the thin message', () => hits.find(h => h.path === path))
    const message = new Webhook(ctx.endpoint.secret).verify(hit.body, hit.headers) as any
    expect(Buffer.byteLength(hit.body)).toBeLessThanOrEqual(1024)
    expect(message.data).toMatchObject({ thin: true, id: accepted.body.id, runId: accepted.body.runId, lab: ctx.lab.slug })
    expect(message.data.result).toBeUndefined()
    // The delivery log shows the thin message that was sent, not the whole event.
    const logged = (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries/${hit.headers['webhook-id']}`)).body
    expect(logged.attempts[0].requestBody).toBe(hit.body)
    // The full result is one authorised GET away.
    const client = (await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/clients`, { name: 'fetcher' })).body
    const token = await (await fetch(url('/api/v1/oauth/token'), { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: new URLSearchParams({ grant_type: 'client_credentials', client_id: client.clientId, client_secret: client.clientSecret }) })).json() as { access_token: string }
    const full = await fetch(url(new URL(message.data.resultUrl).pathname), { headers: { authorization: `Bearer ${token.access_token}` } })
    expect(full.status).toBe(200)
    const body = acquisitionView.parse(await full.json())
    expect(body.result.peaks.length).toBeGreaterThan(0)
  })

  it('disables an endpoint that keeps failing past the configured time, and e-mails the admins', async () => {
    const path = `/down-${unique('x')}`
    const ctx = await setUp(path)
    await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 1500), bearer(ctx.key.secret))
    await until('the endpoint to be disabled', async () => (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}`)).body.status === 'disabled')
    const endpoint = (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}`)).body
    expect(endpoint.disabledReason).toMatch(/no delivery succeeded/)
    const mail = await waitForMail(demoUser('admin').email, new RegExp(`Webhook endpoint disabled: http://127.0.0.1:${SINK_PORT}${path}`))
    expect(mail.text).toContain('replay')
    const dead = (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries?status=dead`)).body.items
    expect(dead).toHaveLength(1)
  })
})
