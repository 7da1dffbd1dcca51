// Issue 21, point 6, on the server: slug and kind are the hub admin's to change, and granting
// what is granted already is refused on the field instead of silently doing nothing.
import { beforeAll, describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise()

const ids = { saltmarsh: '', northgate: '' }
let integrator: ConsoleClient
let manager: ConsoleClient
let admin: ConsoleClient

beforeAll(async () => {
  const sql = testDb()
  ids.saltmarsh = (await sql<{ id: string }[]>`select id from labs where slug = 'saltmarsh-isotopes'`)[0]!.id
  ids.northgate = (await sql<{ id: string }[]>`select id from partners where slug = 'northgate-water'`)[0]!.id
  integrator = await new ConsoleClient().signIn(demoUser('integrator').email, demoUser('integrator').password)
  manager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
  admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
})

describe('slug and kind are the admin\'s', () => {
  it('an integrator changing the partner\'s slug or kind is refused on the field and nothing is stored', async () => {
    for (const [field, value] of [['slug', unique('renamed')], ['kind', 'data_team']] as const) {
      const res = await integrator.patch(`/api/console/partners/${ids.northgate}`, { [field]: value })
      expect(res.status).toBe(403)
      expect(res.body.errors).toEqual([{ path: field, message: 'only a hub admin may change this' }])
    }
    const [row] = await testDb()<{ slug: string, kind: string }[]>`select slug, kind from partners where id = ${ids.northgate}`
    expect(row).toEqual({ slug: 'northgate-water', kind: 'regulator' })
  })

  it('the same slug and kind sent back with another change are fine (the console form sends every field)', async () => {
    const current = (await integrator.get(`/api/console/partners/${ids.northgate}`)).body
    const res = await integrator.patch(`/api/console/partners/${ids.northgate}`, { slug: current.slug, kind: current.kind, contactEmail: 'data@northgate-water.example' })
    expect(res.status).toBe(200)
  })

  it('a lab manager cannot change the lab\'s slug; an admin can', async () => {
    const refused = await manager.patch(`/api/console/labs/${ids.saltmarsh}`, { slug: unique('lab-renamed') })
    expect(refused.status).toBe(403)
    expect(refused.body.errors[0].path).toBe('slug')
    const { lab } = await labWithInstrument()
    const slug = unique('moved')
    expect((await admin.patch(`/api/console/labs/${lab.id}`, { slug })).status).toBe(200)
    expect((await testDb()<{ slug: string }[]>`select slug from labs where id = ${lab.id}`)[0]!.slug).toBe(slug)
  })
})

describe('grants', () => {
  it('granting the same partner the same events again is refused on the partner field; other events update it', async () => {
    const { lab } = await labWithInstrument()
    expect((await admin.post(`/api/console/labs/${lab.id}/grants`, { partnerId: ids.northgate, eventTypes: ['result.released'] })).status).toBe(201)
    const again = await admin.post(`/api/console/labs/${lab.id}/grants`, { partnerId: ids.northgate, eventTypes: ['result.released'] })
    expect(again.status).toBe(409)
    expect(again.body.errors).toEqual([expect.objectContaining({ path: 'partnerId' })])
    const changed = await admin.post(`/api/console/labs/${lab.id}/grants`, { partnerId: ids.northgate, eventTypes: ['result.released', 'sequence.processed'] })
    expect(changed.status).toBe(201)
    const rows = await testDb()<{ event_types: string[] }[]>`select event_types from grants where lab_id = ${lab.id}`
    expect(rows).toEqual([{ event_types: ['result.released', 'sequence.processed'] }])
  })
})
