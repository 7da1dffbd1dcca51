// OWASP API Security Top 10 (2023), API1–API5, for lab keys and partner tokens.
import { describe, expect, it } from 'vitest'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { url } from '@nuxt/test-utils/e2e'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise()

describe('OWASP API Security Top 10 (2023)', () => {
  it('API1/API3: no answer to a lab key carries a key hash, a secret, or another tenant\'s id', async () => {
    const mine = await labWithInstrument()
    const other = await labWithInstrument()
    const [{ secret_hash: hash }] = await mine.sql<[{ secret_hash: string }]>`select secret_hash from api_keys where id = ${mine.key.id}`
    const posted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(mine.key.secret))
    const otherPosted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(other.key.secret))
    const answers = [posted.body]
    for (const path of ['/api/v1/acquisitions', `/api/v1/acquisitions/${posted.body.id}`, `/api/v1/acquisitions/${posted.body.id}/result`, `/api/v1/acquisitions/${otherPosted.body.id}`]) {
      answers.push((await new ConsoleClient().request('GET', path, undefined, bearer(mine.key.secret))).body)
    }
    const text = JSON.stringify(answers)
    for (const forbidden of [hash, mine.key.secret, other.lab.id, other.key.id]) expect(text).not.toContain(forbidden)
    // Another lab's acquisition is 404; its id appears only as the path the caller asked for.
    expect(answers[4]).toMatchObject({ status: 404, instance: `/api/v1/acquisitions/${otherPosted.body.id}` })
    expect(JSON.stringify(answers.slice(0, 4))).not.toContain(otherPosted.body.id)
    // The lab's own id is not needed by a lab system either: answers name the instrument by slug.
    expect(text).not.toContain(mine.lab.id)
  })

  it('API3: a body that tries to set labId, status or versions is refused and stores nothing', async () => {
    const { key, lab, sql } = await labWithInstrument()
    for (const extra of [{ labId: lab.id }, { status: 'processed' }, { versions: { geometry: 9 } }, { result: {} }]) {
      const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', { ...co2Acquisition(), ...extra }, bearer(key.secret))
      expect(res.status).toBe(422)
    }
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(0)
  })

  it('API5: a key\'s scopes bound what it may call', async () => {
    const { admin, lab } = await labWithInstrument()
    const writer = (await admin.post(`/api/console/labs/${lab.id}/keys`, { name: 'writer', scopes: ['acquisitions:write'] })).body
    expect((await new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, bearer(writer.secret))).status).toBe(403)
    expect((await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(writer.secret))).status).toBe(201)
  })

  it('API2: console sessions do not open the v1 API, and lab keys do not open the console', async () => {
    const { admin, key } = await labWithInstrument()
    expect((await admin.get('/api/v1/acquisitions')).status).toBe(401)
    expect((await new ConsoleClient().request('GET', '/api/console/me', undefined, bearer(key.secret))).status).toBe(401)
  })
})

async function partnerClient(admin: ConsoleClient) {
  const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Audit Partner', kind: 'data_team', contactEmail: 'p@example.org' })).body
  return (await admin.post(`/api/console/partners/${partner.id}/clients`, { name: 'pipeline' })).body as { id: string, clientId: string, clientSecret: string }
}

const tokenWith = (authorization: string | undefined, form: Record<string, string> = { grant_type: 'client_credentials' }) => fetch(url('/api/v1/oauth/token'), {
  method: 'POST',
  headers: { 'content-type': 'application/x-www-form-urlencoded', ...(authorization === undefined ? {} : { authorization }) },
  body: new URLSearchParams(form),
})
const b64 = (s: string) => Buffer.from(s).toString('base64')

describe('malformed credentials', () => {
  it.each([
    ['not base64', 'Basic !!!not-base64!!!'],
    ['empty', 'Basic '],
    ['no colon', `Basic ${b64('awc_nocolon')}`],
    ['an empty client id', `Basic ${b64(':secret')}`],
    ['a broken percent-escape', `Basic ${b64('%zz:secret')}`],
    ['two credentials', `Basic ${b64('a:b')} ${b64('c:d')}`],
    ['a huge header', `Basic ${'A'.repeat(6000)}`],
  ])('a Basic header at the token endpoint with %s gets a 401 invalid_client problem, not a 500', async (_what, header) => {
    const res = await tokenWith(header)
    expect(res.status).toBe(401)
    expect(res.headers.get('content-type')).toContain('application/problem+json')
    expect(res.headers.get('www-authenticate')).toContain('Basic')
    expect(await res.json()).toMatchObject({ status: 401, error: 'invalid_client' })
  })

  it.each([
    ['garbage', 'Bearer %%%garbage%%%'],
    ['a JWT-shaped string', 'Bearer aaa.bbb.ccc'],
    ['a header with a broken kid', `Bearer ${Buffer.from(JSON.stringify({ alg: 'ES256', kid: { x: 1 } })).toString('base64url')}.e30.sig`],
    ['no token', 'Bearer '],
    ['another scheme', 'Digest username="x"'],
  ])('%s as a partner token gets a 401 problem', async (_what, header) => {
    const res = await new ConsoleClient().request('GET', '/api/v1/events', undefined, { authorization: header })
    expect(res.status).toBe(401)
    expect(res.headers.get('content-type')).toContain('application/problem+json')
  })

  it.each([
    ['garbage', 'nuxt-session=garbage'],
    ['a sealed-looking string', `nuxt-session=Fe26.2**${'a'.repeat(64)}*${'b'.repeat(22)}*${'c'.repeat(43)}*1*${'d'.repeat(43)}~2`],
    ['a huge value', `nuxt-session=${'x'.repeat(3000)}`],
  ])('a session cookie of %s gets a 401 problem', async (_what, cookie) => {
    const res = await new ConsoleClient().request('GET', '/api/console/me', undefined, { cookie })
    expect(res.status).toBe(401)
    expect(res.body).toMatchObject({ status: 401, type: 'urn:arcwise:problem:not-signed-in' })
  })
})

describe('the audit trail of tokens', () => {
  it('records each token issued and each refused, with the client and the reason', async () => {
    const { admin } = await labWithInstrument()
    const client = await partnerClient(admin)
    expect((await tokenWith(`Basic ${b64(`${client.clientId}:${client.clientSecret}`)}`)).status).toBe(200)
    expect((await tokenWith(`Basic ${b64(`${client.clientId}:wrong`)}`)).status).toBe(401)
    const rows = await testDb()`select action, actor_label, detail from audit_log where target_id = ${client.id} and action like 'token.%' order by id`
    expect(rows.map(r => [r.action, r.actor_label, r.detail.reason ?? r.detail.scope])).toEqual([
      ['token.issued', `client:${client.clientId}`, 'results:read events:read peaks:read'],
      ['token.refused', `client:${client.clientId}`, 'wrong-secret'],
    ])
  })

  it('records a refused access token at a partner route', async () => {
    const before = (await testDb()`select coalesce(max(id), 0)::int as id from audit_log`)[0]!.id
    expect((await new ConsoleClient().request('GET', '/api/v1/events', undefined, { authorization: 'Bearer aaa.bbb.ccc' })).status).toBe(401)
    const [row] = await testDb()`select action, detail from audit_log where id > ${before} and action = 'token.refused'`
    expect(row).toMatchObject({ action: 'token.refused', detail: { reason: 'invalid-or-expired', path: '/api/v1/events' } })
  })

  it('the audit log cannot be changed or emptied, even with the app\'s own database role', async () => {
    const sql = testDb()
    const [row] = await sql`select id from audit_log order by id desc limit 1`
    await expect(sql`update audit_log set action = 'rewritten' where id = ${row!.id}`).rejects.toThrow(/append-only/)
    await expect(sql`delete from audit_log where id = ${row!.id}`).rejects.toThrow(/append-only/)
    await expect(sql`truncate audit_log`).rejects.toThrow(/append-only/)
    const [still] = await sql`select action from audit_log where id = ${row!.id}`
    expect(still!.action).not.toBe('rewritten')
  })
})
