import { describe, expect, it } from 'vitest'
import { ConsoleClient, linkIn, mailTo, testDb, unique, useArcwise, waitForMail } from '../support/server'

await useArcwise()

async function makeUser() {
  const admin = await new ConsoleClient().signIn('admin@arcwise.example', 'demo-admin-passphrase')
  const email = `${unique('forgetful')}@example.org`
  await admin.post('/api/console/invitations', { email, role: 'viewer' })
  const token = linkIn((await waitForMail(email, /invited/)).text, '/invitations').split('/').pop()!
  const user = new ConsoleClient()
  await user.post(`/api/console/invitation-links/${token}`, { name: 'Forgetful', password: 'first password here' })
  return { email, user }
}

describe('password reset', () => {
  it('answers the same for an unknown e-mail, and mails only real accounts', async () => {
    const { email } = await makeUser()
    const ghost = `${unique('ghost')}@example.org`
    const known = await new ConsoleClient().post('/api/console/password-resets', { email })
    const unknown = await new ConsoleClient().post('/api/console/password-resets', { email: ghost })
    expect(known.status).toBe(202)
    expect(unknown.status).toBe(202)
    expect(unknown.body).toEqual(known.body)
    await waitForMail(email, /Reset your Arcwise password/)
    expect(await mailTo(ghost)).toEqual([])
  })

  it('a mailed link sets a new password once, ends other sessions and lifts a lockout', async () => {
    const { email, user } = await makeUser()
    for (let i = 0; i < 5; i++) await new ConsoleClient().post('/api/console/session', { email, password: 'wrong guess' })
    expect((await new ConsoleClient().post('/api/console/session', { email, password: 'first password here' })).status).toBe(429)

    await new ConsoleClient().post('/api/console/password-resets', { email })
    const token = linkIn((await waitForMail(email, /Reset/)).text, '/reset').split('/').pop()!
    expect((await new ConsoleClient().get(`/api/console/password-resets/${token}`)).body.email).toBe(email)

    const weak = await new ConsoleClient().post(`/api/console/password-resets/${token}`, { password: 'aaaaaaaaaaaaaaaa' })
    expect(weak.status).toBe(422)
    expect(weak.body.errors[0].path).toBe('password')

    expect((await new ConsoleClient().post(`/api/console/password-resets/${token}`, { password: 'second password here' })).status).toBe(200)
    expect((await user.get('/api/console/me')).status).toBe(401)
    expect((await new ConsoleClient().post('/api/console/session', { email, password: 'first password here' })).status).toBe(401)
    expect((await new ConsoleClient().post('/api/console/session', { email, password: 'second password here' })).status).toBe(200)

    const reuse = await new ConsoleClient().post(`/api/console/password-resets/${token}`, { password: 'third password here' })
    expect(reuse.status).toBe(410)
    expect(reuse.body.type).toBe('urn:arcwise:problem:reset-used')
  })

  it('an expired link is refused with a reason', async () => {
    const { email } = await makeUser()
    await new ConsoleClient().post('/api/console/password-resets', { email })
    const token = linkIn((await waitForMail(email, /Reset/)).text, '/reset').split('/').pop()!
    await testDb()`update password_reset_tokens set expires_at = now() - interval '1 second' where user_id = (select id from users where email = ${email})`
    const res = await new ConsoleClient().post(`/api/console/password-resets/${token}`, { password: 'second password here' })
    expect(res.status).toBe(410)
    expect(res.body.detail).toMatch(/expired/)
  })
})
