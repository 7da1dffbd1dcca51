import { describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

await useArcwise()

const signedIn = (role: 'admin' | 'viewer' | 'lab_manager') => new ConsoleClient().signIn(demoUser(role).email, demoUser(role).password)
/** A second client holding a copy of `client`'s cookie, as an attacker who copied it would. */
const copyOf = (client: ConsoleClient) => Object.assign(new ConsoleClient(), { cookie: client.cookie })

describe('console sessions end on the server', () => {
  it('a copied cookie stops working once its owner signs out', async () => {
    const viewer = await signedIn('viewer')
    const thief = copyOf(viewer)
    expect((await thief.get('/api/console/me')).status).toBe(200)
    expect((await viewer.delete('/api/console/session')).status).toBe(204)
    const replay = await thief.get('/api/console/me')
    expect(replay.status).toBe(401)
    expect(replay.headers.get('content-type')).toContain('application/problem+json')
    expect(replay.body).toMatchObject({ status: 401, type: 'urn:arcwise:problem:not-signed-in' })
  })

  it('signing out in one browser leaves the same person signed in in another', async () => {
    const laptop = await signedIn('viewer')
    const desk = await signedIn('viewer')
    expect((await laptop.delete('/api/console/session')).status).toBe(204)
    expect((await desk.get('/api/console/me')).status).toBe(200)
  })

  it('clearing the cookie through nuxt-auth-utils\' own route ends the session too', async () => {
    const viewer = await signedIn('viewer')
    const thief = copyOf(viewer)
    expect((await viewer.delete('/api/_auth/session')).status).toBeLessThan(300)
    expect((await thief.get('/api/console/me')).status).toBe(401)
  })

  it('an admin ends every session of a user: each of their browsers is signed out at once, and the audit log says who did it', async () => {
    const admin = await signedIn('admin')
    const manager = demoUser('lab_manager')
    const first = await signedIn('lab_manager')
    const second = await signedIn('lab_manager')
    const me = (await first.get('/api/console/me')).body
    const listed = (await admin.get('/api/console/users')).body.items.find((u: { id: string }) => u.id === me.id)
    expect(listed.openSessions).toBeGreaterThanOrEqual(2)

    const ended = await admin.delete(`/api/console/users/${me.id}/sessions`)
    expect(ended.status).toBe(200)
    expect(ended.body.ended).toBeGreaterThanOrEqual(2)
    expect((await first.get('/api/console/me')).status).toBe(401)
    expect((await second.get('/api/console/me')).status).toBe(401)
    expect((await admin.get('/api/console/users')).body.items.find((u: { id: string }) => u.id === me.id).openSessions).toBe(0)
    const [audit] = await testDb()`select actor_label, detail from audit_log where action = 'user.sessions-ended' and target_id = ${me.id} order by id desc limit 1`
    expect(audit).toMatchObject({ actor_label: demoUser('admin').email, detail: { email: manager.email } })
    // They can sign in again.
    expect((await (await signedIn('lab_manager')).get('/api/console/me')).status).toBe(200)
  })

  it('only an admin may end another person\'s sessions', async () => {
    const viewer = await signedIn('viewer')
    const manager = await signedIn('lab_manager')
    const managerId = (await manager.get('/api/console/me')).body.id
    expect((await viewer.delete(`/api/console/users/${managerId}/sessions`)).status).toBe(403)
    expect((await manager.get('/api/console/me')).status).toBe(200)
    const admin = await signedIn('admin')
    expect((await admin.delete('/api/console/users/00000000-0000-4000-8000-000000000000/sessions')).status).toBe(404)
  })

  it('a session row records where it was opened, and an ended one stays ended', async () => {
    const viewer = await signedIn('viewer')
    await viewer.delete('/api/console/session')
    const [row] = await testDb()`select s.ip, s.ended_at, s.user_agent from user_sessions s join users u on u.id = s.user_id
      where u.email = ${demoUser('viewer').email} order by s.created_at desc limit 1`
    expect(row!.ip).toBe('127.0.0.1')
    expect(row!.ended_at).not.toBeNull()
  })
})
