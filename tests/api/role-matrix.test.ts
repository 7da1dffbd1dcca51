// Every console route, as each role and signed out: 200/201/204, 401, 403 or 404.
// "Not yours" answers 404, the same as "not there" (CONVENTIONS.md, rule 6).
import { beforeAll, describe, expect, it } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { demoUser } from '../support/demo'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise()

type Who = Role | 'anonymous'
const everyone: Who[] = ['admin', 'lab_manager', 'integrator', 'viewer', 'anonymous']
const ids = { ownLab: '', otherLab: '', ownPartner: '', otherPartner: '', targetUser: '', ownInstrument: '', ownKey: '' }
const clients = {} as Record<Who, ConsoleClient>

beforeAll(async () => {
  const sql = testDb()
  const labs = await sql<{ id: string, slug: string }[]>`select id, slug from labs`
  const partners = await sql<{ id: string, slug: string }[]>`select id, slug from partners`
  ids.ownLab = labs.find(l => l.slug === 'saltmarsh-isotopes')!.id
  ids.otherLab = labs.find(l => l.slug === 'halvard-ridge')!.id
  ids.ownPartner = partners.find(p => p.slug === 'northgate-water')!.id
  ids.otherPartner = partners.find(p => p.slug === 'tidewater-clinical')!.id
  const [target] = await sql<{ id: string }[]>`insert into users (email, name, password_hash, role) values (${`${unique('target')}@example.org`}, 'Matrix Target', 'x', 'viewer') returning id`
  ids.targetUser = target!.id
  const [instrument] = await sql<{ id: string }[]>`insert into instruments (lab_id, slug, name) values (${ids.ownLab}, ${unique('ms')}, 'Matrix MS') returning id`
  ids.ownInstrument = instrument!.id
  await sql`insert into geometry_versions (instrument_id, version, kind, params, valid_from) values (${ids.ownInstrument}, 1, 'potential-sector', ${sql.json({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm', u: 0 } })}, now())`
  for (const who of everyone) {
    const client = new ConsoleClient()
    if (who !== 'anonymous') await client.signIn(demoUser(who).email, demoUser(who).password)
    clients[who] = client
  }
})

interface Row { method: string, path: () => string | Promise<string>, body?: () => unknown, expect: Partial<Record<Who, number>> & { else: number } }
const S = (n: number, overrides: Partial<Record<Who, number>> = {}) => ({ else: n, anonymous: 401, ...overrides })
const pendingInvitation = async () => {
  const [row] = await testDb()<{ id: string }[]>`insert into invitations (email, role, token_hash, expires_at) values (${`${unique('inv')}@example.org`}, 'viewer', ${unique('hash')}, now() + interval '1 day') returning id`
  return row!.id
}

const labKey = async (labId: string) => {
  const [row] = await testDb()<{ id: string }[]>`insert into api_keys (lab_id, name, prefix, secret_hash, scopes) values (${labId}, 'to revoke', ${unique('p').slice(-12)}, 'x', ${['results:read']}) returning id`
  return row!.id
}

const matrix: Row[] = [
  { method: 'GET', path: () => '/api/console/me', expect: S(200) },
  { method: 'GET', path: () => '/api/console/overview', expect: S(200) },
  { method: 'GET', path: () => '/api/console/users', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'PATCH', path: () => `/api/console/users/${ids.targetUser}`, body: () => ({ role: 'viewer' }), expect: S(403, { admin: 200 }) },
  { method: 'PATCH', path: () => '/api/console/users/5a0b4f84-84a8-4c39-a7c4-9a3b1d8a2e10', body: () => ({ role: 'viewer' }), expect: S(403, { admin: 404 }) },
  { method: 'GET', path: () => '/api/console/invitations', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'POST', path: () => '/api/console/invitations', body: () => ({ email: `${unique('invitee')}@example.org`, role: 'viewer' }), expect: S(403, { admin: 201 }) },
  { method: 'DELETE', path: async () => `/api/console/invitations/${await pendingInvitation()}`, expect: S(403, { admin: 200 }) },
  { method: 'GET', path: () => '/api/console/labs', expect: S(200, { integrator: 403 }) },
  { method: 'POST', path: () => '/api/console/labs', body: () => ({ slug: unique('lab'), name: 'Matrix Lab', site: 'Site M', contactEmail: 'm@example.org' }), expect: S(403, { admin: 201 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.ownLab}`, expect: S(200, { integrator: 403 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.otherLab}`, expect: S(200, { integrator: 403, lab_manager: 404 }) },
  { method: 'PATCH', path: () => `/api/console/labs/${ids.ownLab}`, body: () => ({ site: 'Estuary Field Station, Site A' }), expect: S(403, { admin: 200, lab_manager: 200 }) },
  { method: 'PATCH', path: () => `/api/console/labs/${ids.otherLab}`, body: () => ({ site: 'Ridge Campus, Site B' }), expect: S(403, { admin: 200, lab_manager: 404 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.ownLab}/instruments`, expect: S(200, { integrator: 403 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.otherLab}/instruments`, expect: S(200, { integrator: 403, lab_manager: 404 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.ownLab}/instruments`, body: () => ({ slug: unique('ms'), name: 'New MS', geometry: { kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } } }), expect: S(403, { admin: 201, lab_manager: 201 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.otherLab}/instruments`, body: () => ({ slug: unique('ms'), name: 'New MS', geometry: { kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } } }), expect: S(403, { admin: 201, lab_manager: 404 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.ownLab}/instruments/${ids.ownInstrument}`, expect: S(200, { integrator: 403 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.ownLab}/instruments/${ids.ownInstrument}/geometry-versions`, body: () => ({ geometry: { kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } }, validFrom: '2026-12-01T00:00:00Z' }), expect: S(403, { admin: 201, lab_manager: 201 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.ownLab}/instruments/${ids.ownInstrument}/calibrations`, body: () => ({ degree: 1, points: [{ measuredMz: 28, referenceMz: 28.0061 }, { measuredMz: 40, referenceMz: 39.9618 }, { measuredMz: 44, referenceMz: 43.9893 }], validFrom: '2026-12-01T00:00:00Z' }), expect: S(403, { admin: 201, lab_manager: 201 }) },
  { method: 'GET', path: () => `/api/console/labs/${ids.ownLab}/keys`, expect: S(200, { integrator: 403 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.ownLab}/keys`, body: () => ({ name: 'matrix key', scopes: ['results:read'] }), expect: S(403, { admin: 201, lab_manager: 201 }) },
  { method: 'POST', path: () => `/api/console/labs/${ids.otherLab}/keys`, body: () => ({ name: 'matrix key', scopes: ['results:read'] }), expect: S(403, { admin: 201, lab_manager: 404 }) },
  { method: 'DELETE', path: async () => `/api/console/labs/${ids.ownLab}/keys/${await labKey(ids.ownLab)}`, expect: S(403, { admin: 200, lab_manager: 200 }) },
  { method: 'GET', path: () => '/api/console/partners', expect: S(200, { lab_manager: 403 }) },
  { method: 'POST', path: () => '/api/console/partners', body: () => ({ slug: unique('p'), name: 'Matrix Partner', kind: 'data_team', contactEmail: 'p@example.org' }), expect: S(403, { admin: 201 }) },
  { method: 'GET', path: () => `/api/console/partners/${ids.ownPartner}`, expect: S(200, { lab_manager: 403 }) },
  { method: 'GET', path: () => `/api/console/partners/${ids.otherPartner}`, expect: S(200, { lab_manager: 403, integrator: 404 }) },
  { method: 'PATCH', path: () => `/api/console/partners/${ids.ownPartner}`, body: () => ({ contactEmail: 'data@northgate-water.example' }), expect: S(403, { admin: 200, integrator: 200 }) },
  { method: 'PATCH', path: () => `/api/console/partners/${ids.otherPartner}`, body: () => ({ contactEmail: 'lims@tidewater.example' }), expect: S(403, { admin: 200, integrator: 404 }) },
  { method: 'GET', path: () => '/api/console/audit', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'GET', path: () => '/api/console/audit/actions', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'GET', path: () => '/api/console/audit/target-types', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'GET', path: () => '/api/console/audit.csv', expect: S(403, { admin: 200, viewer: 200 }) },
  { method: 'GET', path: () => '/api/console/search?q=saltmarsh', expect: S(200) },
  // Open to all where the SMTP fake runs, so a person not signed in can open their link.
  { method: 'GET', path: () => '/api/console/dev/mail', expect: { else: 200 } },
  { method: 'POST', path: () => '/api/console/password-resets', body: () => ({ email: 'nobody@example.org' }), expect: { else: 202 } },
  { method: 'GET', path: () => `/api/console/password-resets/${'A'.repeat(43)}`, expect: { else: 404 } },
  { method: 'GET', path: () => `/api/console/invitation-links/${'B'.repeat(43)}`, expect: { else: 404 } },
]

// The route as written in the table, for the test's name.
const routeOf = (row: Row) => row.path.toString().replace(/^.*?=>\s*/, '').replace(/`/g, '')
const cases = matrix.flatMap(row => everyone.map(who => ({ ...row, route: routeOf(row), who, status: row.expect[who] ?? row.expect.else })))

describe('console role matrix', () => {
  it.each(cases)('$method $route as $who -> $status', async ({ method, path, body, who, status }) => {
    const res = await clients[who].request(method, await path(), body?.())
    expect(res.status, JSON.stringify(res.body)).toBe(status)
    if (status >= 400) {
      expect(res.headers.get('content-type')).toContain('application/problem+json')
      expect(res.body.status).toBe(status)
    }
  })

  it('signing out ends the session for every role', async () => {
    for (const who of everyone) {
      const res = await clients[who].delete('/api/console/session')
      expect(res.status).toBe(204)
      expect((await clients[who].get('/api/console/me')).status).toBe(401)
    }
  })
})
