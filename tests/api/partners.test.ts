import { createRemoteJWKSet, decodeProtectedHeader, jwtVerify } from 'jose'
import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { acquisitionView, eventFeedView, peakListView, tokenView } from '../../shared/schemas/responses'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

await useArcwise()

async function partnerWithClient(admin: ConsoleClient) {
  const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Test Partner', kind: 'data_team', contactEmail: 'p@example.org' })).body
  const client = (await admin.post(`/api/console/partners/${partner.id}/clients`, { name: 'pipeline' })).body
  return { partner, client }
}

async function token(clientId: string, clientSecret: string, extra: Record<string, string> = {}) {
  const res = await fetch(url('/api/v1/oauth/token'), {
    method: 'POST',
    headers: { 'content-type': 'application/x-www-form-urlencoded' },
    body: new URLSearchParams({ grant_type: 'client_credentials', client_id: clientId, client_secret: clientSecret, ...extra }),
  })
  return { status: res.status, body: await res.json() as any }
}

const asPartner = (accessToken: string, path: string) => new ConsoleClient().request('GET', path, undefined, { authorization: `Bearer ${accessToken}` })

describe('OAuth 2.0 client credentials and RFC 9068 access tokens', () => {
  it('issues a short-lived at+jwt that verifies against /.well-known/jwks.json (jose)', async () => {
    const { admin } = await labWithInstrument()
    const { client } = await partnerWithClient(admin)
    expect(client.clientSecret).toMatch(/^awcs_/)
    const res = await token(client.clientId, client.clientSecret)
    expect(res.status).toBe(200)
    tokenView.parse(res.body)
    expect(res.body).toMatchObject({ token_type: 'Bearer', expires_in: 300 })
    expect(decodeProtectedHeader(res.body.access_token)).toMatchObject({ typ: 'at+jwt', alg: 'ES256' })
    const keys = createRemoteJWKSet(new URL(url('/.well-known/jwks.json')))
    const { payload } = await jwtVerify(res.body.access_token, keys, { typ: 'at+jwt', audience: 'arcwise-api-v1' })
    // RFC 9068 §2.2: iss, exp, aud, sub, client_id, iat, jti.
    for (const claim of ['iss', 'exp', 'aud', 'sub', 'client_id', 'iat', 'jti']) expect(payload).toHaveProperty(claim)
    expect(payload.exp! - payload.iat!).toBe(300)
  })

  it('refuses a wrong secret, a revoked client, another grant type and an unknown scope', async () => {
    const { admin } = await labWithInstrument()
    const { partner, client } = await partnerWithClient(admin)
    const wrong = await token(client.clientId, `${client.clientSecret}x`)
    expect(wrong.status).toBe(401)
    expect(wrong.body.error).toBe('invalid_client')
    expect((await token(client.clientId, client.clientSecret, { scope: 'admin' })).body.error).toBe('invalid_scope')
    const grant = await fetch(url('/api/v1/oauth/token'), { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: 'grant_type=password' })
    expect((await grant.json() as any).error).toBe('unsupported_grant_type')
    const issued = (await token(client.clientId, client.clientSecret)).body.access_token
    await admin.delete(`/api/console/partners/${partner.id}/clients/${client.id}`)
    expect((await token(client.clientId, client.clientSecret)).status).toBe(401)
    expect((await asPartner(issued, '/api/v1/events')).status).toBe(401)
  })

  it('a lab key is not a partner token and a tampered token is refused', async () => {
    const { admin, key } = await labWithInstrument()
    const { client } = await partnerWithClient(admin)
    expect((await new ConsoleClient().request('GET', '/api/v1/events', undefined, bearer(key.secret))).status).toBe(401)
    const t = (await token(client.clientId, client.clientSecret)).body.access_token as string
    const [h, p, s] = t.split('.')
    const forged = Buffer.from(JSON.stringify({ ...JSON.parse(Buffer.from(p!, 'base64url').toString()), partner_id: 'someone-else' })).toString('base64url')
    expect((await asPartner(`${h}.${forged}.${s}`, '/api/v1/events')).status).toBe(401)
  })
})

describe('partners see only what labs granted them (OWASP API1:2023)', () => {
  it('the event feed, results and peaks follow the grants', async () => {
    const granted = await labWithInstrument()
    const other = await labWithInstrument()
    const { partner, client } = await partnerWithClient(granted.admin)
    const grant = await granted.admin.post(`/api/console/labs/${granted.lab.id}/grants`, { partnerId: partner.id })
    expect(grant.status).toBe(201)
    const mine = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(granted.key.secret))
    const theirs = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(other.key.secret))
    const t = (await token(client.clientId, client.clientSecret)).body.access_token

    const feed = await asPartner(t, '/api/v1/events')
    expect(feed.status).toBe(200)
    eventFeedView.parse(feed.body)
    expect(feed.body.items.map((e: any) => e.data.id)).toEqual([mine.body.id])
    expect(feed.body.items[0]).toMatchObject({ type: 'result.released', lab: granted.lab.slug, sequence: 1 })
    const again = await asPartner(t, `/api/v1/events?cursor=${feed.body.nextCursor}`)
    expect(again.body.items).toEqual([])
    expect(again.body.nextCursor).toBe(feed.body.nextCursor)

    const granted1 = await asPartner(t, `/api/v1/results/${mine.body.id}`)
    acquisitionView.parse(granted1.body)
    expect(granted1.body.result.peaks.length).toBeGreaterThan(0)
    expect((await asPartner(t, `/api/v1/results/${theirs.body.id}`)).status).toBe(404)

    const peaks = await asPartner(t, '/api/v1/peaks?mzMin=43.9&mzMax=44.1')
    peakListView.parse(peaks.body)
    expect(peaks.body.items.length).toBeGreaterThan(0)
    for (const p of peaks.body.items) {
      expect(p.lab).toBe(granted.lab.slug)
      expect(p.mz).toBeGreaterThanOrEqual(43.9)
      expect(p.mz).toBeLessThanOrEqual(44.1)
    }
    const badWindow = await asPartner(t, '/api/v1/peaks?mzMin=44&mzMax=40')
    expect(badWindow.status).toBe(400)
    expect(badWindow.body.errors[0].path).toBe('mzMax')

    await granted.admin.delete(`/api/console/labs/${granted.lab.id}/grants/${grant.body.id}`)
    expect((await asPartner(t, '/api/v1/events')).body.items).toEqual([])
    expect((await asPartner(t, `/api/v1/results/${mine.body.id}`)).status).toBe(404)
  })
})
