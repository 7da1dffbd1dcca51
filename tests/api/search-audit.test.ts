// Issue 21: the console's search (scoped by role: not yours is not found) and the audit log
// in sentences with names, filtered, exported as CSV.
import { beforeAll, describe, expect, it } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument, sectorGeometry } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'
import { insertPausedEndpoint } from '../support/webhooks'
import { url } from '@nuxt/test-utils/e2e'

await useArcwise()

const tok = unique('find').toLowerCase()
const ids = { saltmarsh: '', northgate: '', tidewater: '', ownRun: '', otherRun: '', ownDelivery: '', otherDelivery: '', instrument: '' }
const as = {} as Record<Role, ConsoleClient>

async function post(secret: string, body: unknown) {
  const res = await fetch(url('/api/v1/acquisitions'), { method: 'POST', headers: { 'content-type': 'application/json', ...bearer(secret) }, body: JSON.stringify(body) })
  expect(res.status).toBe(201)
  return (await res.json()) as { id: string }
}

beforeAll(async () => {
  const sql = testDb()
  for (const role of ['admin', 'lab_manager', 'integrator', 'viewer'] as Role[]) as[role] = await new ConsoleClient().signIn(demoUser(role).email, demoUser(role).password)
  ids.saltmarsh = (await sql<{ id: string }[]>`select id from labs where slug = 'saltmarsh-isotopes'`)[0]!.id
  ids.northgate = (await sql<{ id: string }[]>`select id from partners where slug = 'northgate-water'`)[0]!.id
  ids.tidewater = (await sql<{ id: string }[]>`select id from partners where slug = 'tidewater-clinical'`)[0]!.id
  // A run in the lab manager's own lab, and one in a lab of its own.
  const slug = unique('sx').toLowerCase()
  const instrument = await as.admin.post(`/api/console/labs/${ids.saltmarsh}/instruments`, { slug, name: `Search sector ${tok}`, geometry: sectorGeometry, validFrom: '2026-01-01T00:00:00Z' })
  expect(instrument.status).toBe(201)
  ids.instrument = instrument.body.id
  const key = await as.admin.post(`/api/console/labs/${ids.saltmarsh}/keys`, { name: `search key ${tok}`, scopes: ['acquisitions:write'] })
  ids.ownRun = (await post(key.body.secret, { ...co2Acquisition(`${tok}-own`, 1000), instrument: slug, sampleRef: `${tok}-core` })).id
  const other = await labWithInstrument()
  ids.otherRun = (await post(other.key.secret, co2Acquisition(`${tok}-other`, 1000))).id
  // One finished webhook message to each of two partners (the worker leaves them alone).
  for (const partner of [ids.northgate, ids.tidewater]) {
    const endpointId = await insertPausedEndpoint(partner, `https://hooks.example.org/${tok}`)
    const [d] = await sql<{ id: string }[]>`insert into deliveries (endpoint_id, event_type, test_payload, status, attempts, finished_at) values (${endpointId}, 'webhook.test', ${sql.json({ test: true })}, 'succeeded', 1, now()) returning id`
    if (partner === ids.northgate) ids.ownDelivery = d!.id
    else ids.otherDelivery = d!.id
  }
})

const found = async (role: Role, q: string) => {
  const res = await as[role].get(`/api/console/search?q=${encodeURIComponent(q)}`)
  expect(res.status).toBe(200)
  return res.body.items as { kind: string, id: string, title: string, to: string }[]
}

describe('search', () => {
  it('finds run ids within the labs each role reads', async () => {
    const runs = async (role: Role) => (await found(role, tok)).filter(h => h.kind === 'acquisition').map(h => h.id).sort()
    expect(await runs('admin')).toEqual([ids.ownRun, ids.otherRun].sort())
    expect(await runs('viewer')).toEqual([ids.ownRun, ids.otherRun].sort())
    expect(await runs('lab_manager')).toEqual([ids.ownRun])
    expect(await runs('integrator')).toEqual([])
  })

  it('finds samples and instruments, and links each hit to its page', async () => {
    const hits = await found('lab_manager', `${tok}-core`)
    expect(hits).toContainEqual(expect.objectContaining({ kind: 'sample', id: ids.ownRun, title: `${tok}-core`, to: `/console/labs/${ids.saltmarsh}/acquisitions/${ids.ownRun}` }))
    const instruments = (await found('lab_manager', `Search sector ${tok}`)).filter(h => h.kind === 'instrument')
    expect(instruments).toEqual([expect.objectContaining({ id: ids.instrument, to: `/console/labs/${ids.saltmarsh}/instruments/${ids.instrument}` })])
  })

  it('finds a webhook message by its webhook-id only for its own partner', async () => {
    const prefix = ids.otherDelivery.slice(0, 13)
    expect((await found('admin', prefix)).map(h => h.id)).toContain(ids.otherDelivery)
    expect((await found('integrator', prefix)).map(h => h.id)).not.toContain(ids.otherDelivery)
    const own = await found('integrator', ids.ownDelivery)
    expect(own).toEqual([expect.objectContaining({ kind: 'delivery', id: ids.ownDelivery, to: `/console/partners/${ids.northgate}/deliveries/${ids.ownDelivery}` })])
  })

  it('finds labs, partners and people within each role\'s reach', async () => {
    const kinds = async (role: Role, q: string) => (await found(role, q)).map(h => `${h.kind}:${h.title}`)
    expect(await kinds('lab_manager', 'Halvard')).toEqual([])
    expect(await kinds('admin', 'Halvard')).toContain('lab:Halvard Ridge Geochronology')
    expect(await kinds('integrator', 'Tidewater')).toEqual([])
    expect(await kinds('integrator', 'Northgate')).toContain('partner:Northgate Water Authority')
    expect(await kinds('admin', 'Ines')).toContain('user:Ines Varga')
    expect(await kinds('lab_manager', 'Ines')).toEqual([])
  })

  it('refuses a one-character or missing query by naming the field (400, as every bad query), and a signed-out caller', async () => {
    const short = await as.admin.get('/api/console/search?q=a')
    expect(short.status).toBe(400)
    expect(short.body.errors).toEqual([expect.objectContaining({ path: 'q' })])
    expect((await as.admin.get('/api/console/search')).status).toBe(400)
    expect((await new ConsoleClient().get(`/api/console/search?q=${tok}`)).status).toBe(401)
  })

  it('takes LIKE wildcards literally', async () => {
    expect(await found('admin', '%%')).toEqual([])
  })
})

describe('audit log', () => {
  it('reads in sentences with people\'s and things\' names', async () => {
    const res = await as.admin.get(`/api/console/audit?action=key.issued&limit=200`)
    expect(res.status).toBe(200)
    const entry = res.body.items.find((e: { detail: { name?: string } }) => e.detail.name === `search key ${tok}`)
    expect(entry).toMatchObject({ actorName: 'Morgan Ashdown', sentence: `Morgan Ashdown issued the API key "search key ${tok}" for Saltmarsh Stable Isotope Lab with acquisitions:write.` })
  })

  it('filters by who (name), what it is about and the thing itself', async () => {
    const byName = await as.admin.get(`/api/console/audit?actor=${encodeURIComponent('Morgan Ash')}&action=instrument.created&limit=200`)
    expect(byName.body.items.map((e: { targetId: string }) => e.targetId)).toContain(ids.instrument)
    const aboutIt = await as.admin.get(`/api/console/audit?targetType=instrument&target=${ids.instrument}`)
    expect(aboutIt.body.items.map((e: { sentence: string }) => e.sentence)).toEqual([`Morgan Ashdown registered the instrument Search sector ${tok} (potential-sector) at Saltmarsh Stable Isotope Lab.`])
    const nobody = await as.admin.get(`/api/console/audit?actor=${encodeURIComponent('no such person')}`)
    expect(nobody.body.items).toEqual([])
  })

  it('exports the filtered log as CSV with sentences, defusing formula cells', async () => {
    await as.admin.patch(`/api/console/labs/${(await labWithInstrument()).lab.id}`, { name: `=HYPERLINK("x") ${tok}` })
    const res = await as.admin.get(`/api/console/audit.csv?action=lab.updated`)
    expect(res.status).toBe(200)
    expect(res.headers.get('content-type')).toContain('text/csv')
    expect(res.headers.get('content-disposition')).toContain('audit-log.csv')
    const text = res.body as string
    expect(text.split('\n')[0]).toBe('at,actor,actor_login,action,sentence,target_type,target_id,target,ip,detail')
    expect(text).toContain(`'=HYPERLINK`)
    expect(text).not.toMatch(/(^|,)"?=HYPERLINK/m)
    expect(text).not.toContain('key.issued')
  })

  it('is refused to roles without audit:read, the export too', async () => {
    expect((await as.lab_manager.get('/api/console/audit.csv')).status).toBe(403)
    expect((await as.integrator.get('/api/console/audit/target-types')).status).toBe(403)
    expect((await as.viewer.get('/api/console/audit.csv')).status).toBe(200)
  })
})
