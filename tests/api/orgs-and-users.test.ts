import { beforeAll, describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise()

let admin: ConsoleClient
beforeAll(async () => {
  admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
})
const count = async (table: 'labs' | 'partners') => (await testDb().unsafe(`select count(*)::int as n from ${table}`))[0]!.n as number

describe('labs and partners', () => {
  it('registers a lab, shows it in the list, edits it, and audits both', async () => {
    const slug = unique('fen')
    const created = await admin.post('/api/console/labs', { slug, name: 'Fenland Noble Gas Lab', site: 'Fen Station, Site D', contactEmail: 'Gas@Fenland.example' })
    expect(created.status).toBe(201)
    expect(created.body).toMatchObject({ slug, contactEmail: 'gas@fenland.example' })
    expect((await admin.get('/api/console/labs')).body.items.map((l: { slug: string }) => l.slug)).toContain(slug)
    const edited = await admin.patch(`/api/console/labs/${created.body.id}`, { name: 'Fenland Noble-Gas Laboratory' })
    expect(edited.body.name).toBe('Fenland Noble-Gas Laboratory')
    const audit = await testDb()`select action, detail from audit_log where target_id = ${created.body.id} order by id`
    expect(audit.map(a => a.action)).toEqual(['lab.created', 'lab.updated'])
    expect(audit[1]!.detail).toEqual({ changed: ['name'] })
  })

  it.each([
    [{ slug: 'Bad Slug', name: 'X', site: 'Y', contactEmail: 'a@b.example' }, 'slug'],
    [{ slug: 'ok-slug-1', name: '', site: 'Y', contactEmail: 'a@b.example' }, 'name'],
    [{ slug: 'ok-slug-2', name: 'X', site: 'Y', contactEmail: 'not-mail' }, 'contactEmail'],
    [{ slug: 'ok-slug-3', name: 'X', contactEmail: 'a@b.example' }, 'site'],
  ])('refuses %j naming %s, and stores nothing', async (body, field) => {
    const before = await count('labs')
    const res = await admin.post('/api/console/labs', body)
    expect(res.status).toBe(422)
    expect(res.headers.get('content-type')).toContain('application/problem+json')
    expect(res.body.errors.map((e: { path: string }) => e.path)).toEqual([field])
    expect(await count('labs')).toBe(before)
  })

  it('refuses a slug another partner uses, naming the field', async () => {
    const before = await count('partners')
    const res = await admin.post('/api/console/partners', { slug: 'northgate-water', name: 'Copy', kind: 'regulator', contactEmail: 'c@example.org' })
    expect(res.status).toBe(409)
    expect(res.body.errors).toEqual([{ path: 'slug', message: 'another partner uses this slug' }])
    expect(await count('partners')).toBe(before)
  })

  it('a lab manager edits their own lab but cannot change its slug (a hub admin\'s), and an admin cannot move it to a slug in use', async () => {
    const manager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
    const [own] = (await manager.get('/api/console/labs')).body.items
    const res = await manager.patch(`/api/console/labs/${own.id}`, { slug: 'halvard-ridge' })
    expect(res.status).toBe(403)
    expect(res.body.errors[0].path).toBe('slug')
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const taken = await admin.patch(`/api/console/labs/${own.id}`, { slug: 'halvard-ridge' })
    expect(taken.status).toBe(409)
    expect(taken.body.errors[0].path).toBe('slug')
  })
})

describe('users and roles', () => {
  it('changes a role, records the change in the audit log, and the new role acts at once', async () => {
    const sql = testDb()
    const partnerId = (await sql<{ id: string }[]>`select id from partners where slug = 'tidewater-clinical'`)[0]!.id
    const email = `${unique('shift')}@example.org`
    const person = new ConsoleClient()
    await admin.post('/api/console/invitations', { email, role: 'viewer' })
    const { waitForMail, linkIn } = await import('../support/server')
    const token = linkIn((await waitForMail(email, /invited/)).text, '/invitations').split('/').pop()!
    await person.post(`/api/console/invitation-links/${token}`, { name: 'Shift', password: 'a long enough secret' })
    const id = (await person.get('/api/console/me')).body.id
    expect((await person.get('/api/console/audit')).status).toBe(200)

    const changed = await admin.patch(`/api/console/users/${id}`, { role: 'integrator', partnerId })
    expect(changed.status).toBe(200)
    expect(changed.body).not.toHaveProperty('passwordHash')
    expect((await person.get('/api/console/audit')).status).toBe(403)
    expect((await person.get(`/api/console/partners/${partnerId}`)).status).toBe(200)

    const [entry] = await sql`select detail from audit_log where action = 'user.role-changed' and target_id = ${id}`
    expect(entry!.detail).toMatchObject({ from: { role: 'viewer' }, to: { role: 'integrator', partnerId } })
  })

  it('refuses to leave the hub without an active admin', async () => {
    const me = (await admin.get('/api/console/me')).body
    const others = await testDb()`select id from users where role = 'admin' and status = 'active' and id <> ${me.id}`
    for (const o of others) await testDb()`update users set status = 'disabled' where id = ${o.id}`
    const res = await admin.patch(`/api/console/users/${me.id}`, { role: 'viewer' })
    expect(res.status).toBe(409)
    expect(res.body.type).toBe('urn:arcwise:problem:last-admin')
    expect((await admin.get('/api/console/me')).body.role).toBe('admin')
    for (const o of others) await testDb()`update users set status = 'active' where id = ${o.id}`
  })

  it('lists users without password hashes', async () => {
    const res = await admin.get('/api/console/users')
    expect(res.body.items.length).toBeGreaterThanOrEqual(4)
    for (const u of res.body.items) expect(Object.keys(u)).not.toContain('passwordHash')
  })
})
