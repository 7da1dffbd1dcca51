import { describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise()

const signIn = (email: string, password: string) => new ConsoleClient().post('/api/console/session', { email, password })
const withoutInstance = ({ instance: _i, ...rest }: Record<string, unknown>) => rest

describe('sign-in', () => {
  it('signs in with e-mail and password and sets a sealed, HttpOnly, SameSite=Lax cookie', async () => {
    const admin = demoUser('admin')
    const res = await signIn(admin.email.toUpperCase(), admin.password)
    expect(res.status).toBe(200)
    expect(res.body).toMatchObject({ email: admin.email, role: 'admin' })
    expect(res.body).not.toHaveProperty('passwordHash')
    const cookie = res.headers.getSetCookie().find(c => c.startsWith('nuxt-session='))!
    expect(cookie).toMatch(/HttpOnly/i)
    expect(cookie).toMatch(/SameSite=Lax/i)
    expect(cookie).not.toContain(admin.email)
  })

  it('answers an unknown e-mail exactly like a wrong password', async () => {
    const wrongPassword = await signIn(demoUser('viewer').email, 'not-the-password')
    const unknownEmail = await signIn(`${unique('ghost')}@example.org`, 'not-the-password')
    expect(wrongPassword.status).toBe(401)
    expect(unknownEmail.status).toBe(401)
    expect(withoutInstance(unknownEmail.body)).toEqual(withoutInstance(wrongPassword.body))
    expect(wrongPassword.body.detail).toBe('The e-mail or the password is wrong.')
    // A good sign-in clears the count, so this test does not lock the demo viewer.
    expect((await signIn(demoUser('viewer').email, demoUser('viewer').password)).status).toBe(200)
  })

  it('slows repeated failures, then locks the e-mail for a while, known or not, and audits the lock', async () => {
    const sql = testDb()
    const [user] = await sql<{ email: string }[]>`insert into users (email, name, password_hash, role)
      values (${`${unique('locked')}@example.org`}, 'Lock Test', 'scrypt-not-a-real-hash', 'viewer') returning email`
    const email = user!.email
    const statuses: number[] = []
    const times: number[] = []
    for (let i = 0; i < 5; i++) {
      const started = Date.now()
      statuses.push((await signIn(email, `wrong-${i}`)).status)
      times.push(Date.now() - started)
    }
    expect(statuses).toEqual([401, 401, 401, 401, 429])
    expect(times[3]!).toBeGreaterThan(times[0]!) // the answer is held longer each time
    const locked = await signIn(email, 'whatever-it-is')
    expect(locked.status).toBe(429)
    expect(Number(locked.headers.get('retry-after'))).toBeGreaterThan(60)
    expect(locked.body.type).toBe('urn:arcwise:problem:sign-in-locked')

    const ghost = `${unique('ghost')}@example.org`
    const ghostStatuses: number[] = []
    for (let i = 0; i < 6; i++) ghostStatuses.push((await signIn(ghost, 'nope')).status)
    expect(ghostStatuses.slice(-2)).toEqual([429, 429])

    const audit = await sql`select action from audit_log where detail->>'email' = ${email}`
    expect(audit.map(a => a.action)).toContain('sign-in.locked')
  })

  it('writes sign-ins and failures to the audit log', async () => {
    const viewer = demoUser('viewer')
    await signIn(viewer.email, viewer.password)
    const [row] = await testDb()`select action, actor_label, ip from audit_log where action = 'sign-in' and actor_label = ${viewer.email} order by id desc limit 1`
    expect(row).toMatchObject({ action: 'sign-in', actor_label: viewer.email, ip: '127.0.0.1' })
  })

  it('a disabled user cannot sign in and an open session of theirs ends', async () => {
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const email = `${unique('leaver')}@example.org`
    const invited = await admin.post('/api/console/invitations', { email, role: 'viewer' })
    expect(invited.status).toBe(201)
    // Accept through the database-free path: read the token from the captured mail.
    const { waitForMail, linkIn } = await import('../support/server')
    const link = linkIn((await waitForMail(email, /invited/)).text, '/invitations')
    const token = link.split('/').pop()!
    const leaver = new ConsoleClient()
    expect((await leaver.post(`/api/console/invitation-links/${token}`, { name: 'Leaver', password: 'a long enough secret' })).status).toBe(201)
    expect((await leaver.get('/api/console/me')).status).toBe(200)
    const id = (await leaver.get('/api/console/me')).body.id
    expect((await admin.patch(`/api/console/users/${id}`, { role: 'viewer', status: 'disabled' })).status).toBe(200)
    expect((await leaver.get('/api/console/me')).status).toBe(401)
    expect((await signIn(email, 'a long enough secret')).status).toBe(401)
  })
})
