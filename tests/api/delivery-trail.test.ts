// Issue 21, point 2: each result's delivery trail (which endpoints were owed which version and
// event, how each went, whether the recorded signature verifies now, why one stopped), the
// delivery page's reason and one-action signature check, and the partner's results board.
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { demoUser } from '../support/demo'
import { clearScene, goneOrOkSink, homeScene } from '../support/homes'
import { ConsoleClient, useArcwise } from '../support/server'
import { until } from '../support/webhooks'

const SINK_PORT = 4233
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

let scene: Awaited<ReturnType<typeof homeScene>>
const as = {} as Record<Role, ConsoleClient>
type Trail = { items: { type: string, version: number | null, deliveries: { id: string, endpointId: string, state: string, attempts: number, webhookId: string, deliveredAt: string | null, why: string | null, signature: { verdict: string, sentence: string } | null }[] }[] }
const trailPath = () => `/api/console/labs/${scene.saltmarsh}/acquisitions/${scene.released.id}/deliveries`

beforeAll(async () => {
  await goneOrOkSink(SINK_PORT)
  scene = await homeScene(SINK_PORT)
  for (const role of ['admin', 'lab_manager', 'integrator', 'viewer'] as Role[]) as[role] = await new ConsoleClient().signIn(demoUser(role).email, demoUser(role).password)
}, 120_000)
afterAll(() => clearScene(scene))

describe('a result\'s delivery trail', () => {
  it('names each endpoint owed the released version, delivered and verified, or dead with the reason', async () => {
    const res = await as.lab_manager.get<Trail>(trailPath())
    expect(res.status).toBe(200)
    const released = res.body.items.find(e => e.type === 'result.released')!
    expect(released.version).toBe(1)
    const ok = released.deliveries.find(d => d.endpointId === scene.okEndpoint.id)!
    expect(ok).toMatchObject({ state: 'succeeded', attempts: 1, why: null, signature: { verdict: 'current' } })
    expect(ok.webhookId).toBe(ok.id)
    expect(ok.deliveredAt).not.toBeNull()
    const gone = released.deliveries.find(d => d.endpointId === scene.goneEndpoint.id)!
    expect(gone).toMatchObject({ state: 'dead', attempts: 1, signature: { verdict: 'current' } })
    expect(gone.why).toMatch(/410 Gone, which disables the endpoint/)
    // No secret leaves in the trail.
    expect(JSON.stringify(res.body)).not.toMatch(/whsec_|sealed/)
  })

  it('a retraction adds its event and deliveries; a rotated secret is reported honestly', async () => {
    const retract = await as.lab_manager.post(`/api/console/labs/${scene.saltmarsh}/results/${scene.released.result.id}/retract`, { reason: 'sample mislabelled at the bench' })
    expect(retract.status, JSON.stringify(retract.body)).toBe(200)
    const retracted = await until('the retraction delivered', async () => {
      const t = (await as.lab_manager.get<Trail>(trailPath())).body
      const ev = t.items.find(e => e.type === 'result.retracted')
      return ev?.deliveries.find(d => d.endpointId === scene.okEndpoint.id && d.state === 'succeeded') ? ev : undefined
    })
    expect(retracted.version).toBe(1)
    // The gone endpoint is disabled, so it was owed nothing more.
    expect(retracted.deliveries.map(d => d.endpointId)).not.toContain(scene.goneEndpoint.id)

    const rotate = await as.integrator.post(`/api/console/partners/${scene.northgate}/endpoints/${scene.okEndpoint.id}/secret/rotate`, { overlapHours: 1 })
    expect(rotate.status).toBe(200)
    const during = (await as.lab_manager.get<Trail>(trailPath())).body.items[0]!.deliveries.find(d => d.endpointId === scene.okEndpoint.id)!
    expect(during.signature).toMatchObject({ verdict: 'previous' })
    await as.integrator.post(`/api/console/partners/${scene.northgate}/endpoints/${scene.okEndpoint.id}/secret/rotate`, { overlapHours: 0 })
    const after = (await as.lab_manager.get<Trail>(trailPath())).body.items[0]!.deliveries.find(d => d.endpointId === scene.okEndpoint.id)!
    expect(after.signature).toMatchObject({ verdict: 'none', sentence: expect.stringContaining('rotated since') })
  })

  it('is the lab\'s own: another lab\'s acquisition is not found, and an integrator may not read lab pages', async () => {
    expect((await as.lab_manager.get(`/api/console/labs/${scene.saltmarsh}/acquisitions/${scene.other.released.id}/deliveries`)).status).toBe(404)
    expect((await as.lab_manager.get(`/api/console/labs/${scene.other.lab.id}/acquisitions/${scene.other.released.id}/deliveries`)).status).toBe(404)
    expect((await as.integrator.get(trailPath())).status).toBe(403)
    expect((await as.admin.get(`/api/console/labs/${scene.other.lab.id}/acquisitions/${scene.other.released.id}/deliveries`)).status).toBe(200)
  })
})

describe('the delivery page and the results board', () => {
  it('a dead delivery says why it stopped; a signature is checked in one request, for one attempt', async () => {
    const trail = (await as.admin.get<Trail>(trailPath())).body
    const gone = trail.items.find(e => e.type === 'result.released')!.deliveries.find(d => d.endpointId === scene.goneEndpoint.id)!
    const page = await as.integrator.get(`/api/console/partners/${scene.northgate}/deliveries/${gone.id}`)
    expect(page.body.why).toMatch(/410 Gone/)
    const attempt = page.body.attempts[0]
    const check = await as.integrator.get(`/api/console/partners/${scene.northgate}/deliveries/${gone.id}/attempts/${attempt.id}/signature`)
    expect(check.status).toBe(200)
    expect(check.body).toMatchObject({ verdict: 'current', sentence: expect.stringContaining('verifies with the endpoint\'s current secret') })
    // Another partner's attempt is not found, nor is a malformed attempt id (the codebase's rule for ids).
    expect((await as.integrator.get(`/api/console/partners/${scene.other.partner.id}/deliveries/${gone.id}/attempts/${attempt.id}/signature`)).status).toBe(404)
    expect((await as.admin.get(`/api/console/partners/${scene.other.partner.id}/deliveries/${gone.id}/attempts/${attempt.id}/signature`)).status).toBe(404)
    const bad = await as.integrator.get(`/api/console/partners/${scene.northgate}/deliveries/${gone.id}/attempts/x/signature`)
    expect(bad.status).toBe(404)
  })

  it('the partner\'s board groups its results by lab, each with its endpoints, states and verification', async () => {
    const res = await as.integrator.get(`/api/console/partners/${scene.northgate}/delivered-results`)
    expect(res.status).toBe(200)
    const lab = res.body.items.find((l: { labId: string }) => l.labId === scene.saltmarsh)
    const released = lab.results.find((r: { runId: string, type: string }) => r.runId === `${scene.tag}-released` && r.type === 'result.released')
    expect(released.version).toBe(1)
    const byEndpoint = Object.fromEntries(released.endpoints.map((e: { endpointId: string }) => [e.endpointId, e]))
    expect(byEndpoint[scene.goneEndpoint.id]).toMatchObject({ state: 'dead', verified: true })
    // The ok endpoint's secret was rotated twice with no overlap left: its old signature no longer verifies.
    expect(byEndpoint[scene.okEndpoint.id]).toMatchObject({ state: 'succeeded', verified: false })
    expect(JSON.stringify(res.body)).not.toContain(scene.other.lab.id)
    expect((await as.integrator.get(`/api/console/partners/${scene.other.partner.id}/delivered-results`)).status).toBe(404)
  })
})
