// Issue 21, points 1 and 3: each role's home and notifications, and that a lab's people and a
// partner's integrators never see another lab's or partner's items there.
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { demoUser } from '../support/demo'
import { clearScene, goneOrOkSink, homeScene } from '../support/homes'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

const SINK_PORT = 4231
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

let scene: Awaited<ReturnType<typeof homeScene>>
const as = {} as Record<Role, ConsoleClient>

beforeAll(async () => {
  await goneOrOkSink(SINK_PORT)
  scene = await homeScene(SINK_PORT)
  for (const role of ['admin', 'lab_manager', 'lab_reviewer', 'integrator', 'viewer'] as Role[]) as[role] = await new ConsoleClient().signIn(demoUser(role).email, demoUser(role).password)
}, 120_000)
afterAll(() => clearScene(scene))

describe('homes', () => {
  it('a lab manager\'s home lists only their lab\'s instruments, each with its last run, calibration, QC, chart and review state', async () => {
    const res = await as.lab_manager.get('/api/console/home')
    expect(res.status).toBe(200)
    expect(res.body.kind).toBe('lab')
    const { lab } = res.body
    expect(lab.labId).toBe(scene.saltmarsh)
    const own = await testDb()<{ id: string }[]>`select id from instruments where lab_id = ${scene.saltmarsh} order by id`
    expect(lab.instruments.map((i: { id: string }) => i.id).sort()).toEqual(own.map(i => i.id))
    const mine = lab.instruments.find((i: { id: string }) => i.id === scene.instrument.id)
    expect(mine).toMatchObject({
      lastAcquisition: { id: scene.held.id, runId: `${scene.tag}-held` },
      calibration: null,
      qc: { results: 2 },
      chart: { points: 1, violations: 1, violation: { material: 'SM-MARBLE', quantity: 'd13C' } },
      awaitingReview: 1,
    })
    // The demo's carbonate bench has the calibration the seed gave it, six days ago.
    const irms = lab.instruments.find((i: { slug: string }) => i.slug === 'irms-north')
    expect(irms.calibration).toMatchObject({ version: 1 })
    const [{ n } = { n: -1 }] = await testDb()<{ n: number }[]>`select count(*)::int as n from results r where r.lab_id = ${scene.saltmarsh} and r.review_state = 'held'
      and not exists (select 1 from results x where x.id = r.superseded_by and x.review_state <> 'rejected')`
    expect(lab.review.results).toBe(n)
    // Northgate's endpoint that answered 410 is disabled, and a delivery of the lab's run died there.
    const northgate = lab.partners.find((p: { id: string }) => p.id === scene.northgate)
    expect(northgate).toMatchObject({ name: 'Northgate Water Authority', endpointsDisabled: expect.any(Number), deadDeliveries: expect.any(Number) })
    expect(northgate.endpointsDisabled).toBeGreaterThanOrEqual(1)
    expect(northgate.deadDeliveries).toBeGreaterThanOrEqual(1)
    expect(northgate.reasons).toContain('the receiver answered 410 Gone')
  })

  it('no item of another lab reaches a lab\'s home: instruments, runs, review counts, partners', async () => {
    for (const role of ['lab_manager', 'lab_reviewer'] as Role[]) {
      const text = JSON.stringify((await as[role].get('/api/console/home')).body)
      for (const foreign of [scene.other.lab.id, scene.other.instrument.id, scene.other.partner.id, scene.other.endpoint.id, scene.other.held.id, scene.other.released.id, `${scene.tag}-other`, 'ELSEWHERE-STD', scene.other.partner.name]) {
        expect(text, `${role} home shows ${foreign}`).not.toContain(foreign)
      }
    }
  })

  it('an integrator\'s home: its endpoints with their health, dead deliveries to replay, and the labs that grant it with their latest released results', async () => {
    const res = await as.integrator.get('/api/console/home')
    expect(res.body.kind).toBe('partner')
    const { partner } = res.body
    expect(partner.partnerId).toBe(scene.northgate)
    const gone = partner.endpoints.find((e: { id: string }) => e.id === scene.goneEndpoint.id)
    expect(gone).toMatchObject({ status: 'disabled', disabledReason: 'the receiver answered 410 Gone', dead: 1 })
    expect(partner.endpoints.find((e: { id: string }) => e.id === scene.okEndpoint.id)).toMatchObject({ status: 'active', delivered: 1, dead: 0 })
    expect(partner.dead.items.find((d: { endpointId: string }) => d.endpointId === scene.goneEndpoint.id)).toMatchObject({ runId: `${scene.tag}-released`, eventType: 'result.released', lastStatusCode: 410 })
    const saltmarsh = partner.labs.find((l: { labId: string }) => l.labId === scene.saltmarsh)
    expect(saltmarsh.latest[0]).toMatchObject({ acquisitionId: scene.released.id, runId: `${scene.tag}-released`, version: 1 })
    const text = JSON.stringify(res.body)
    for (const foreign of [scene.other.partner.id, scene.other.endpoint.id, scene.other.lab.id, `${scene.tag}-other`]) expect(text).not.toContain(foreign)
  })

  it('the hub\'s home (admin, viewer): disabled endpoints of every partner, labs with work waiting, silent instruments, invitations', async () => {
    for (const role of ['admin', 'viewer'] as Role[]) {
      const res = await as[role].get('/api/console/home')
      expect(res.body.kind).toBe('hub')
      const { hub } = res.body
      const ids = hub.endpoints.map((e: { id: string }) => e.id)
      expect(ids).toEqual(expect.arrayContaining([scene.goneEndpoint.id, scene.other.endpoint.id]))
      expect(ids).not.toContain(scene.okEndpoint.id)
      expect(hub.labs.find((l: { id: string }) => l.id === scene.other.lab.id)).toMatchObject({ awaitingReview: 1, chartViolations: 1 })
      // The demo's instruments have sent nothing in the test database.
      expect(hub.staleInstruments.items.some((i: { slug: string, lastAcquiredAt: string | null }) => i.slug === 'irms-north' && i.lastAcquiredAt === null)).toBe(true)
      expect(hub.invitations).toMatchObject({ pending: expect.any(Number) })
    }
  })
})

describe('notifications', () => {
  const kinds = (items: { kind: string }[]) => new Set(items.map(i => i.kind))

  it('a lab\'s people are told of a disabled endpoint taking their results, dead deliveries, results to review and a chart violation, of their lab only', async () => {
    for (const role of ['lab_manager', 'lab_reviewer'] as Role[]) {
      const res = await as[role].get('/api/console/notifications')
      expect(res.status).toBe(200)
      expect(kinds(res.body.items)).toEqual(new Set(['endpoint-disabled', 'deliveries-dead', 'review-waiting', 'chart-violation']))
      expect(res.body.items.find((n: { kind: string }) => n.kind === 'chart-violation').link).toBe(`/console/labs/${scene.saltmarsh}/control-charts/${scene.instrument.id}?material=SM-MARBLE&quantity=d13C`)
      expect(res.body.items.find((n: { kind: string }) => n.kind === 'review-waiting').link).toBe(`/console/labs/${scene.saltmarsh}/review`)
      const text = JSON.stringify(res.body)
      for (const foreign of [scene.other.lab.id, scene.other.instrument.id, scene.other.partner.id, scene.other.endpoint.id, 'ELSEWHERE-STD', scene.other.partner.name]) {
        expect(text, `${role} notifications show ${foreign}`).not.toContain(foreign)
      }
    }
  })

  it('an integrator is told of its own partner\'s disabled endpoint and dead deliveries, never of control charts or other partners', async () => {
    const res = await as.integrator.get('/api/console/notifications')
    expect(kinds(res.body.items)).toEqual(new Set(['endpoint-disabled', 'deliveries-dead']))
    expect(res.body.items.find((n: { kind: string }) => n.kind === 'deliveries-dead').link).toBe(`/console/partners/${scene.northgate}/deliveries?status=dead`)
    const text = JSON.stringify(res.body)
    for (const foreign of [scene.other.partner.id, scene.other.endpoint.id, scene.other.lab.id, scene.other.partner.name]) expect(text).not.toContain(foreign)
  })

  it('an admin is told of every partner\'s disabled endpoints and every lab\'s chart violations; nobody signed out is told anything', async () => {
    const res = await as.admin.get('/api/console/notifications')
    const text = JSON.stringify(res.body)
    for (const seen of [scene.goneEndpoint.id, scene.other.endpoint.id, scene.other.instrument.id]) expect(text).toContain(seen)
    expect(kinds(res.body.items).has('review-waiting')).toBe(false)
    expect((await new ConsoleClient().get('/api/console/notifications')).status).toBe(401)
    expect((await new ConsoleClient().get('/api/console/home')).status).toBe(401)
  })
})
