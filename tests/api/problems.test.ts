// Errors leave as RFC 9457 problem documents (https://www.rfc-editor.org/rfc/rfc9457).
import { describe, expect, it } from 'vitest'
import { url } from '@nuxt/test-utils/e2e'
import { demoUser } from '../support/demo'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise()

describe('problem documents', () => {
  it('malformed JSON is a 400 problem document', async () => {
    const res = await new ConsoleClient().request('POST', '/api/console/session', '{"email":', {})
    expect(res.status).toBe(400)
    expect(res.headers.get('content-type')).toBe('application/problem+json')
    expect(res.body).toEqual({ type: 'urn:arcwise:problem:malformed-json', title: 'Bad request', status: 400, detail: 'The request body is not valid JSON.', instance: '/api/console/session' })
  })

  it('an unknown API route is a 404 problem document, not the HTML page', async () => {
    const res = await new ConsoleClient().get('/api/console/no-such-thing')
    expect(res.status).toBe(404)
    expect(res.body.type).toBe('urn:arcwise:problem:not-found')
  })

  it('a malformed id is answered as a missing one', async () => {
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    expect((await admin.get('/api/console/labs/not-a-uuid')).status).toBe(404)
  })

  it('refuses console changes from another origin', async () => {
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const res = await admin.request('POST', '/api/console/labs', { slug: 'cross-site', name: 'X', site: 'Y', contactEmail: 'a@b.example' }, { origin: 'https://elsewhere.example' })
    expect(res.status).toBe(403)
    expect(res.body.type).toBe('urn:arcwise:problem:cross-origin')
  })

  it('the benchmark routes do not exist unless NUXT_BENCH_ROUTES=true, so nobody can make this server post to a URL', async () => {
    for (const path of ['/_bench/send-loop', '/_bench/baseline']) {
      const res = await new ConsoleClient().request('POST', path, { url: 'http://127.0.0.1:9/', count: 1, concurrency: 1, body: '{}' }, {})
      expect(res.status).toBe(404)
      expect(res.body.type).toBe('urn:arcwise:problem:not-found')
    }
  })

  it('pages still get the HTML error page', async () => {
    const res = await fetch(url('/no-such-page'), { headers: { accept: 'text/html' } })
    expect(res.status).toBe(404)
    expect(res.headers.get('content-type')).toContain('text/html')
  })
})
