import { beforeAll, describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { ConsoleClient, linkIn, testDb, unique, useArcwise, waitForMail } from '../support/server'

await useArcwise()

let admin: ConsoleClient
let labId: string
beforeAll(async () => {
  admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
  labId = (await testDb()<{ id: string }[]>`select id from labs where slug = 'kestrel-leaktest'`)[0]!.id
})

async function invite(body: Record<string, unknown>) {
  const res = await admin.post('/api/console/invitations', body)
  expect(res.status, JSON.stringify(res.body)).toBe(201)
  const mail = await waitForMail(body.email as string, /invited to Arcwise/)
  return { invitation: res.body, token: linkIn(mail.text, '/invitations').split('/').pop()!, mail }
}

describe('invitations', () => {
  it('an admin invites a lab manager, who follows the mailed link, sets a password and is signed in', async () => {
    const email = `${unique('manager')}@kestrel-leak.example`
    const { invitation, token, mail } = await invite({ email, role: 'lab_manager', labId, name: 'Rosa Quill' })
    expect(invitation).not.toHaveProperty('tokenHash')
    expect(mail.text).toContain('lab manager of Kestrel Leak-Test Services')

    const person = new ConsoleClient()
    const described = await person.get(`/api/console/invitation-links/${token}`)
    expect(described.body).toMatchObject({ email, role: 'lab_manager', scope: 'Kestrel Leak-Test Services', name: 'Rosa Quill' })

    const weak = await person.post(`/api/console/invitation-links/${token}`, { name: 'Rosa Quill', password: 'short' })
    expect(weak.status).toBe(422)
    expect(weak.body.errors).toEqual([{ path: 'password', message: 'must be at least 12 characters' }])
    expect((await testDb()`select 1 from users where email = ${email}`).length).toBe(0)

    const accepted = await person.post(`/api/console/invitation-links/${token}`, { name: 'Rosa Quill', password: 'tidal gauge sixteen' })
    expect(accepted.status).toBe(201)
    const me = await person.get('/api/console/me')
    expect(me.body).toMatchObject({ email, role: 'lab_manager', labId })
    expect((await person.get('/api/console/labs')).body.items.map((l: { id: string }) => l.id)).toEqual([labId])

    const again = await new ConsoleClient().post(`/api/console/invitation-links/${token}`, { name: 'X', password: 'tidal gauge sixteen' })
    expect(again.status).toBe(410)
    expect(again.body.detail).toMatch(/accepted already/)
    const audit = await testDb()`select action from audit_log where target_id = ${me.body.id}`
    expect(audit.map(a => a.action)).toContain('invitation.accepted')
  })

  it('names the field for a lab manager without a lab, an e-mail taken, or a lab that is not there', async () => {
    const noLab = await admin.post('/api/console/invitations', { email: `${unique('x')}@example.org`, role: 'lab_manager' })
    expect(noLab.status).toBe(422)
    expect(noLab.body.errors).toEqual([{ path: 'labId', message: 'a lab manager needs a lab' }])

    const taken = await admin.post('/api/console/invitations', { email: demoUser('viewer').email, role: 'viewer' })
    expect(taken.status).toBe(409)
    expect(taken.body.errors[0].path).toBe('email')

    const ghostLab = await admin.post('/api/console/invitations', { email: `${unique('x')}@example.org`, role: 'lab_manager', labId: '2b0f6a3c-1d5e-4f7a-8b9c-0d1e2f3a4b5c' })
    expect(ghostLab.status).toBe(422)
    expect(ghostLab.body.errors[0]).toEqual({ path: 'labId', message: 'no such lab' })
  })

  it('an expired or withdrawn invitation says so and creates nobody', async () => {
    const expired = await invite({ email: `${unique('late')}@example.org`, role: 'viewer' })
    await testDb()`update invitations set expires_at = now() - interval '1 minute' where id = ${expired.invitation.id}`
    const res = await new ConsoleClient().post(`/api/console/invitation-links/${expired.token}`, { name: 'Late', password: 'a long enough secret' })
    expect(res.status).toBe(410)
    expect(res.body.type).toBe('urn:arcwise:problem:invitation-expired')

    const withdrawn = await invite({ email: `${unique('gone')}@example.org`, role: 'viewer' })
    expect((await admin.delete(`/api/console/invitations/${withdrawn.invitation.id}`)).status).toBe(200)
    const res2 = await new ConsoleClient().get(`/api/console/invitation-links/${withdrawn.token}`)
    expect(res2.status).toBe(410)
    expect(res2.body.type).toBe('urn:arcwise:problem:invitation-revoked')
    expect((await testDb()`select 1 from users where email in (${expired.invitation.email}, ${withdrawn.invitation.email})`).length).toBe(0)
  })

  it('lists invitations with their state, without token hashes', async () => {
    const list = await admin.get('/api/console/invitations')
    expect(list.status).toBe(200)
    expect(list.body.items.length).toBeGreaterThan(0)
    for (const i of list.body.items) {
      expect(['pending', 'accepted', 'revoked', 'expired']).toContain(i.state)
      expect(i).not.toHaveProperty('tokenHash')
    }
  })
})
