import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { ConsoleClient, expectRateLimited, testDb, unique, useArcwise } from '../support/server'

// The hub behind a reverse proxy on loopback; console changes limited to 5 a minute per user.
await useArcwise({ env: { NUXT_TRUSTED_PROXIES: '127.0.0.1/32, ::1', NUXT_RATE_LIMIT_CONSOLE_PER_MINUTE: '5' } })

const signInFrom = (forwardedFor: string, email: string, password: string) =>
  new ConsoleClient().request('POST', '/api/console/session', { email, password }, { 'x-forwarded-for': forwardedFor })

describe('behind a trusted proxy', () => {
  it('audit rows and sessions name the real client, the rightmost hop the proxy saw, not what the client wrote before it', async () => {
    const viewer = demoUser('viewer')
    const res = await signInFrom('6.6.6.6, 203.0.113.7', viewer.email, viewer.password)
    expect(res.status).toBe(200)
    const [audit] = await testDb()`select ip from audit_log where action = 'sign-in' and actor_label = ${viewer.email} order by id desc limit 1`
    expect(audit!.ip).toBe('203.0.113.7')
    const [session] = await testDb()`select s.ip from user_sessions s join users u on u.id = s.user_id where u.email = ${viewer.email} order by s.created_at desc limit 1`
    expect(session!.ip).toBe('203.0.113.7')
  })

  it('one client\'s failed sign-ins lock out that client, not everyone behind the same proxy', async () => {
    // The address limit (100 failures an hour) already spent by 198.51.100.66:
    await testDb()`insert into rate_limits (key, points, expire) values ('signin-ip:198.51.100.66', 101, now() + interval '15 minutes')
      on conflict (key) do update set points = 101, expire = now() + interval '15 minutes'`
    const viewer = demoUser('viewer')
    const attacker = await signInFrom('198.51.100.66', `${unique('guess')}@example.org`, 'guessing')
    expect(attacker.status).toBe(429)
    expect(Number(attacker.headers.get('retry-after'))).toBeGreaterThan(0)
    const colleague = await signInFrom('198.51.100.67', viewer.email, viewer.password)
    expect(colleague.status).toBe(200)
  })

  it('sends HSTS when the proxy says the client came over HTTPS', async () => {
    const secure = await fetch(url('/api/health'), { headers: { 'x-forwarded-proto': 'https' } })
    expect(secure.headers.get('strict-transport-security')).toBe('max-age=31536000; includeSubDomains')
    expect(secure.headers.get('content-security-policy')).toContain('upgrade-insecure-requests')
    const plain = await fetch(url('/api/health'), { headers: { 'x-forwarded-proto': 'http' } })
    expect(plain.headers.get('strict-transport-security')).toBeNull()
  })
})

describe('console changes per user', () => {
  it('past the limit a user\'s changes get 429 with Retry-After, while their reads and other users\' changes go on', async () => {
    // Other test files' changes in the last minute count too: start from none.
    await testDb()`delete from rate_limits where key like 'console:%'`
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const statuses: number[] = []
    // Invalid labs: each is refused (422) after it is counted, so nothing is stored.
    for (let i = 0; i < 5; i++) statuses.push((await admin.post('/api/console/labs', { name: '' })).status)
    expect(statuses).toEqual([422, 422, 422, 422, 422])
    expectRateLimited(await admin.post('/api/console/labs', { name: '' }))
    expect((await admin.get('/api/console/labs')).status).toBe(200)
    const manager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
    expect((await manager.post('/api/console/labs', { name: '' })).status).toBe(403)
  })
})
