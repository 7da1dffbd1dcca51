import { createServer, type IncomingMessage } from 'node:http'
import { Webhook } from 'standardwebhooks'
import { afterAll, describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise, waitForMail } from '../support/server'
import { grantedPartnerWithEndpoint, until } from '../support/webhooks'

// Webhook delivery against sinks on loopback that fail in scripted ways. The retry schedule
// is shortened to seconds and the sink's address is the one allowlisted past the SSRF guard.

const SINK_PORT = 4190
await useArcwise({ env: {
  NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`,
  NUXT_WEBHOOKS_RETRY_SCHEDULE: '1,1,1',
  NUXT_WEBHOOKS_TIMEOUT_MS: '1500',
  NUXT_WEBHOOKS_POLL_MS: '200',
} })

interface Hit { path: string, headers: Record<string, string>, body: string, at: number }
const hits: Hit[] = []
const script = new Map<string, ((req: IncomingMessage) => { status: number, headers?: Record<string, string> } | 'reset' | 'hang')[]>()
const sink = createServer((req, res) => {
  const chunks: Buffer[] = []
  req.on('data', c => chunks.push(c as Buffer))
  req.on('end', () => {
    const path = req.url!
    hits.push({ path, headers: Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])), body: Buffer.concat(chunks).toString(), at: Date.now() })
    const steps = script.get(path) ?? []
    const step = steps.length > 1 ? steps.shift()! : steps[0]
    const answer = step ? step(req) : { status: 200 }
    if (answer === 'reset') return req.socket.destroy()
    if (answer === 'hang') return
    res.writeHead(answer.status, answer.headers).end('received')
  })
})
await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))

const sinkUrl = (path: string) => `http://127.0.0.1:${SINK_PORT}${path}`
const hitsTo = (path: string) => hits.filter(h => h.path === path)

/** A lab that grants a new partner, that partner's integrator, and one endpoint at `path`. */
async function partnerWithEndpoint(path: string, extra: Record<string, unknown> = {}) {
  const ctx = await grantedPartnerWithEndpoint(sinkUrl(path), extra)
  const { partner, endpoint } = ctx
  const post = (runId = unique('run')) => new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(runId, 1500), bearer(ctx.key.secret))
  const delivery = async (status: string) => until(`a ${status} delivery`, async () => {
    const list = await ctx.admin.get(`/api/console/partners/${partner.id}/deliveries?endpoint=${endpoint.id}&status=${status}`)
    return list.body.items[0] as { id: string } | undefined
  })
  const detail = async (id: string) => (await ctx.admin.get(`/api/console/partners/${partner.id}/deliveries/${id}`)).body
  return { ...ctx, post, delivery, detail }
}

describe('signed delivery of result events', () => {
  it('posts each accepted result once, signed per Standard Webhooks with the endpoint secret, with lab and sequence', async () => {
    const path = `/ok-${unique('x')}`
    const ctx = await partnerWithEndpoint(path)
    expect(ctx.endpoint.secret).toMatch(/^whsec_/)
    const accepted = await ctx.post()
    expect(accepted.status).toBe(201)
    const [hit] = await until('the message at the sink', () => hitsTo(path).length ? hitsTo(path) : undefined)
    // Verified with the standardwebhooks package, as a receiver would.
    const payload = new Webhook(ctx.endpoint.secret).verify(hit!.body, hit!.headers) as any
    expect(payload.type).toBe('result.released')
    expect(payload.data).toMatchObject({ id: accepted.body.id, lab: ctx.lab.slug, sequence: expect.any(Number), runId: accepted.body.runId })
    expect(payload.data.result.peaks.length).toBeGreaterThan(0)
    // A tampered body fails verification.
    expect(() => new Webhook(ctx.endpoint.secret).verify(hit!.body.replace('result.released', 'result.created '), hit!.headers)).toThrow()
    const done = await ctx.delivery('succeeded')
    expect(hit!.headers['webhook-id']).toBe(done.id)
    const detail = await ctx.detail(done.id)
    expect(detail.attempts).toHaveLength(1)
    expect(detail.attempts[0]).toMatchObject({ class: 'success', statusCode: 200, responseExcerpt: 'received', replay: false })
    expect(detail.attempts[0].requestHeaders['webhook-signature']).toMatch(/^v1,/)
    // The log shows the request as the receiver got it: the body byte for byte (it is rebuilt
    // from the event rather than stored with each attempt) and headers it verifies with.
    expect(detail.attempts[0].requestBody).toBe(hit!.body)
    expect(new Webhook(ctx.endpoint.secret).verify(detail.attempts[0].requestBody, detail.attempts[0].requestHeaders)).toMatchObject({ type: 'result.released' })
  })

  it('the delivery rows are written with the acquisition: one per entitled endpoint, none for a paused-then-deleted or ungranted one', async () => {
    const path = `/count-${unique('x')}`
    const ctx = await partnerWithEndpoint(path)
    // A second partner without a grant from this lab gets nothing.
    const other = (await ctx.admin.post('/api/console/partners', { slug: unique('p'), name: 'Ungranted', kind: 'data_team', contactEmail: 'u@example.org' })).body
    expect((await ctx.admin.post(`/api/console/partners/${other.id}/endpoints`, { url: sinkUrl(`${path}-other`) })).status).toBe(201)
    const accepted = await ctx.post()
    const rows = await testDb()`select d.endpoint_id from deliveries d join events e on e.id = d.event_id where e.payload->>'id' = ${accepted.body.id}`
    expect(rows.map(r => r.endpoint_id)).toEqual([ctx.endpoint.id])
  })
})

describe('retries, classes and dead letters', () => {
  it('retries 500s with the same webhook-id and succeeds; every attempt is classified', async () => {
    const path = `/flaky-${unique('x')}`
    script.set(path, [() => ({ status: 500 }), () => ({ status: 503 }), () => ({ status: 200 })])
    const ctx = await partnerWithEndpoint(path)
    await ctx.post()
    const done = await ctx.delivery('succeeded')
    const sent = hitsTo(path)
    expect(sent).toHaveLength(3)
    expect(new Set(sent.map(h => h.headers['webhook-id']))).toEqual(new Set([done.id]))
    // The schedule (1 s with ±10 % jitter) spaces the attempts.
    expect(sent[1]!.at - sent[0]!.at).toBeGreaterThanOrEqual(800)
    expect((await ctx.detail(done.id)).attempts.map((a: any) => a.class)).toEqual(['server-error', 'server-error', 'success'])
  })

  it('gives up after the schedule: the delivery is dead; timeouts, resets and redirects are failures of their own class', async () => {
    for (const [kind, answer, cls] of [['hang', 'hang', 'timeout'], ['reset', 'reset', 'connection-failed'], ['redirect', { status: 302, headers: { location: 'http://169.254.169.254/' } }, 'redirect-refused']] as const) {
      const path = `/${kind}-${unique('x')}`
      script.set(path, [() => answer])
      const ctx = await partnerWithEndpoint(path)
      await ctx.post()
      const dead = await ctx.delivery('dead')
      const detail = await ctx.detail(dead.id)
      // One first attempt and three retries (schedule 1,1,1), all of the same class.
      expect(detail.attempts.map((a: any) => a.class)).toEqual([cls, cls, cls, cls])
      if (kind === 'redirect') expect(hits.some(h => h.path === '/')).toBe(false)
    }
  })

  it('honours Retry-After on 429', async () => {
    const path = `/limited-${unique('x')}`
    script.set(path, [() => ({ status: 429, headers: { 'retry-after': '3' } }), () => ({ status: 200 })])
    const ctx = await partnerWithEndpoint(path)
    await ctx.post()
    await ctx.delivery('succeeded')
    const [first, second] = hitsTo(path)
    expect(second!.at - first!.at).toBeGreaterThanOrEqual(2900)
  })

  it('410 Gone disables the endpoint, kills its waiting deliveries and e-mails its integrators and the admins', async () => {
    const path = `/gone-${unique('x')}`
    script.set(path, [() => ({ status: 410 })])
    const ctx = await partnerWithEndpoint(path)
    await ctx.post()
    const dead = await ctx.delivery('dead')
    expect((await ctx.detail(dead.id)).attempts).toHaveLength(1)
    const endpoint = (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}`)).body
    expect(endpoint).toMatchObject({ status: 'disabled', disabledReason: expect.stringContaining('410') })
    await waitForMail(demoUser('admin').email, /Webhook endpoint disabled/)
    // The next result owes this endpoint nothing while it is disabled.
    const accepted = await ctx.post()
    expect(await testDb()`select 1 from deliveries d join events e on e.id = d.event_id where e.payload->>'id' = ${accepted.body.id}`).toHaveLength(0)
  })

  it('replays a dead delivery as a new attempt of the same message, one by one and in bulk', async () => {
    const path = `/recovering-${unique('x')}`
    script.set(path, [() => ({ status: 500 })])
    const ctx = await partnerWithEndpoint(path)
    await ctx.post()
    await ctx.post()
    const dead = await ctx.delivery('dead')
    await until('both dead', async () => (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries?status=dead`)).body.items.length === 2)
    const hitsOfDead = () => hitsTo(path).filter(h => h.headers['webhook-id'] === dead.id).length
    const before = hitsOfDead()
    script.set(path, [() => ({ status: 200 })])
    expect((await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/deliveries/${dead.id}/replay`)).body).toEqual({ replayed: 1 })
    await until('the replay to succeed', async () => (await ctx.detail(dead.id)).status === 'succeeded')
    const attempts = (await ctx.detail(dead.id)).attempts
    expect(attempts.at(-1)).toMatchObject({ class: 'success', replay: true })
    // The replay reached the receiver once more under the same webhook-id, and only once.
    expect(before).toBeGreaterThan(0)
    expect(hitsOfDead()).toBe(before + 1)
    // A succeeded delivery is not replayable; the other dead one goes in bulk.
    expect((await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/deliveries/${dead.id}/replay`)).status).toBe(409)
    expect((await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/deliveries/replay`, { endpoint: ctx.endpoint.id })).body).toEqual({ replayed: 1 })
    await until('no dead left', async () => (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries?status=dead`)).body.items.length === 0)
  })
})

describe('endpoints', () => {
  it('pause holds deliveries, resume sends them; rotation signs with both secrets during the overlap', async () => {
    const path = `/paused-${unique('x')}`
    const ctx = await partnerWithEndpoint(path)
    const base = `/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}`
    expect((await ctx.admin.patch(base, { status: 'paused' })).body.status).toBe('paused')
    await ctx.post()
    await new Promise(r => setTimeout(r, 1500))
    expect(hitsTo(path)).toHaveLength(0)
    const rotated = (await ctx.admin.post(`${base}/secret/rotate`, { overlapHours: 1 })).body
    expect(rotated.secret).toMatch(/^whsec_/)
    expect((await ctx.admin.patch(base, { status: 'active' })).body.status).toBe('active')
    const [hit] = await until('the held message', () => hitsTo(path).length ? hitsTo(path) : undefined)
    expect(hit!.headers['webhook-signature']!.split(' ')).toHaveLength(2)
    new Webhook(rotated.secret).verify(hit!.body, hit!.headers)
    new Webhook(ctx.endpoint.secret).verify(hit!.body, hit!.headers)
    const revealed = (await ctx.admin.post(`${base}/secret/reveal`)).body
    expect(revealed).toMatchObject({ secret: rotated.secret, previous: { secret: ctx.endpoint.secret } })
  })

  it('a test message reaches the endpoint and the answer says how it went', async () => {
    const path = `/test-${unique('x')}`
    const ctx = await partnerWithEndpoint(path)
    const res = await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}/test`)
    expect(res.body).toMatchObject({ ok: true, class: 'success', statusCode: 200 })
    expect(JSON.parse(hitsTo(path)[0]!.body).type).toBe('webhook.test')
  })

  it('integrators manage their own partner\'s endpoints only; viewers read; lab managers are refused', async () => {
    const ctx = await partnerWithEndpoint(`/scope-${unique('x')}`)
    const integrator = await new ConsoleClient().signIn(demoUser('integrator').email, demoUser('integrator').password)
    const base = `/api/console/partners/${ctx.partner.id}/endpoints`
    expect((await integrator.get(base)).status).toBe(404)
    expect((await integrator.post(`${base}/${ctx.endpoint.id}/secret/reveal`)).status).toBe(404)
    const viewer = await new ConsoleClient().signIn(demoUser('viewer').email, demoUser('viewer').password)
    expect((await viewer.get(base)).status).toBe(200)
    expect((await viewer.post(base, { url: 'https://hooks.example.org/x' })).status).toBe(403)
    expect((await viewer.post(`${base}/${ctx.endpoint.id}/secret/reveal`)).status).toBe(403)
    const manager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
    expect((await manager.get(base)).status).toBe(403)
    // No answer carries the sealed secret.
    expect(JSON.stringify((await ctx.admin.get(base)).body)).not.toMatch(/whsec_|sealed/)
  })
})

describe('the SSRF guard', () => {
  // Addresses that are not global unicast (ipaddr.js ranges), in the spellings WHATWG URL
  // parsing accepts; plus schemes, ports and credentials that webhooks may not use.
  it.each([
    ['http://127.0.0.1/hook', 'loopback'],
    ['http://2130706433/hook', 'loopback (decimal)'],
    ['http://0x7f.0.0.1/hook', 'loopback (hex)'],
    ['http://0177.0.0.1/hook', 'loopback (octal)'],
    ['http://127.1/hook', 'loopback (shortened)'],
    ['http://[::1]/hook', 'IPv6 loopback'],
    ['http://[::ffff:127.0.0.1]/hook', 'IPv4-mapped loopback'],
    ['http://10.1.2.3/hook', 'private'],
    ['http://172.16.0.1/hook', 'private'],
    ['http://192.168.0.10/hook', 'private'],
    ['http://169.254.169.254/latest', 'link-local (cloud metadata)'],
    ['http://100.64.0.1/hook', 'CGNAT'],
    ['http://[64:ff9b::a01:203]/hook', 'NAT64'],
    ['http://0.0.0.0/hook', 'unspecified'],
    ['http://[fd00::1]/hook', 'unique local'],
    ['http://[fe80::1]/hook', 'IPv6 link-local'],
    ['http://224.0.0.1/hook', 'multicast'],
    ['http://255.255.255.255/hook', 'broadcast'],
    ['ftp://hooks.example.org/x', 'not http(s)'],
    ['http://user:pw@hooks.example.org/x', 'credentials'],
    ['https://hooks.example.org:8080/x', 'port not allowed'],
    ['http://hooks.example.org/x', 'plain http to a host not on the allowlist'],
    ['https://localhost/hook', 'a host name that resolves to loopback'],
  ])('refuses %s (%s) with a problem naming url, and stores nothing', async (target) => {
    const ctx = await labWithInstrument()
    const partner = (await ctx.admin.post('/api/console/partners', { slug: unique('p'), name: 'Guard', kind: 'data_team', contactEmail: 'g@example.org' })).body
    const res = await ctx.admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: target })
    expect(res.status).toBe(422)
    expect(res.headers.get('content-type')).toContain('application/problem+json')
    expect(res.body.errors[0].path).toBe('url')
    expect(await testDb()`select 1 from webhook_endpoints where partner_id = ${partner.id}`).toHaveLength(0)
  })

  it('says why on the url field when a name resolves to loopback or the URL is plain http, and keeps the saved URL on an edit', async () => {
    const ctx = await partnerWithEndpoint(`/edit-${unique('x')}`)
    const at = `/api/console/partners/${ctx.partner.id}/endpoints`
    const loopName = await ctx.admin.post(at, { url: 'https://localhost/hook' })
    expect(loopName.status).toBe(422)
    expect(loopName.body.errors).toEqual([{ path: 'url', message: expect.stringMatching(/localhost resolves to 127\.0\.0\.1 is a loopback address/) }])
    const plain = await ctx.admin.post(at, { url: 'http://hooks.example.org/x' })
    expect(plain.body.errors).toEqual([{ path: 'url', message: expect.stringContaining('must use https') }])
    for (const url of ['https://localhost/elsewhere', 'http://hooks.example.org/x']) {
      const edit = await ctx.admin.patch(`${at}/${ctx.endpoint.id}`, { url, description: 'moved' })
      expect(edit.status).toBe(422)
      expect(edit.body.errors[0].path).toBe('url')
    }
    expect((await ctx.admin.get(`${at}/${ctx.endpoint.id}`)).body).toMatchObject({ url: ctx.endpoint.url, description: ctx.endpoint.description })
    // A public https name that does not resolve (yet) is kept: the check at each send decides.
    expect((await ctx.admin.post(at, { url: 'https://hooks.example.invalid/x' })).status).toBe(201)
  })

  it('refuses at send a name that resolves to loopback by then (saved while it pointed elsewhere)', async () => {
    const ctx = await partnerWithEndpoint(`/rebind-${unique('x')}`)
    // What DNS rebinding does: the stored name now resolves to loopback.
    await testDb()`update webhook_endpoints set url = 'https://localhost/hook' where id = ${ctx.endpoint.id}`
    const res = await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/endpoints/${ctx.endpoint.id}/test`)
    expect(res.body).toMatchObject({ ok: false, class: 'guard-refused', error: expect.stringContaining('loopback') })
  })
})
