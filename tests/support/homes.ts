import postgres from 'postgres'
import { url } from '@nuxt/test-utils/e2e'
import { expect } from 'vitest'
import { demoUser } from './demo'
import { testEnv } from './env'
import { bearer, co2Acquisition, labWithInstrument, sectorGeometry, setRelease } from './lab'
import { ConsoleClient, testDb, unique } from './server'
import { recordingSink, until } from './webhooks'

// Issue 21, points 1–3: a scene the homes, the delivery trail and the notifications are read
// against, made through the product's own routes wherever a route exists. In the demo lab
// (Saltmarsh, the demo lab manager's) one released run reached one of Northgate's endpoints
// and died at the other, which answered 410 and was disabled by the worker; one run is held;
// a control chart broke a rule. Another lab has the same kinds of trouble, with a partner of
// its own: none of it may show in Saltmarsh's home or notifications.

/** A receiver that answers 410 Gone under /gone/ and 200 elsewhere, keeping what arrived. */
export const goneOrOkSink = (port: number) => recordingSink(port, path => path.startsWith('/gone/') ? 410 : 200)

/** Posts a run as a lab system would, under the request id `lab-<runId>` (the lab's own). */
async function postRun(secret: string, body: { runId: string } & Record<string, unknown>) {
  const headers = { 'content-type': 'application/json', 'x-request-id': `lab-${body.runId}`, ...bearer(secret) }
  const res = await fetch(url('/api/v1/acquisitions'), { method: 'POST', headers, body: JSON.stringify(body) })
  expect(res.status).toBe(201)
  return (await res.json()) as { id: string, result: { id: string } }
}

async function violation(labId: string, instrumentId: string, material: string) {
  await testDb()`insert into control_points (lab_id, instrument_id, material, quantity, at, value, accepted, u, violations)
    values (${labId}, ${instrumentId}, ${material}, 'd13C', now() - interval '1 hour', 5.2, 2.0, 0.05, ${['1-3s']})`
}

async function deliveriesSettled(eventAcquisitionId: string, endpointIds: string[]) {
  const sql = testDb()
  return until('the deliveries to settle', async () => {
    const rows = await sql<{ status: string }[]>`select d.status from deliveries d join events ev on ev.id = d.event_id
      where ev.payload->>'id' = ${eventAcquisitionId} and d.endpoint_id = any(${endpointIds}::uuid[])`
    return rows.length === endpointIds.length && rows.every(r => r.status !== 'pending')
  })
}

export async function homeScene(sinkPort: number) {
  const sql = testDb()
  const tag = unique('home').toLowerCase()
  const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
  const manager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
  const saltmarsh = (await sql<{ id: string }[]>`select id from labs where slug = 'saltmarsh-isotopes'`)[0]!.id
  const northgate = (await sql<{ id: string }[]>`select id from partners where slug = 'northgate-water'`)[0]!.id

  // Northgate's two endpoints: one that takes everything, one whose receiver has gone.
  const okEndpoint = (await admin.post(`/api/console/partners/${northgate}/endpoints`, { url: `http://127.0.0.1:${sinkPort}/ok/${tag}`, description: `Northgate intake ${tag}` })).body
  const goneEndpoint = (await admin.post(`/api/console/partners/${northgate}/endpoints`, { url: `http://127.0.0.1:${sinkPort}/gone/${tag}`, description: `Northgate archive ${tag}` })).body
  expect(okEndpoint.id && goneEndpoint.id).toBeTruthy()

  const slug = `${tag}-sector`
  const instrument = (await admin.post(`/api/console/labs/${saltmarsh}/instruments`, { slug, name: `Home sector ${tag}`, geometry: sectorGeometry, validFrom: '2026-01-01T00:00:00Z' })).body
  const key = (await admin.post(`/api/console/labs/${saltmarsh}/keys`, { name: `home key ${tag}`, scopes: ['acquisitions:write'] })).body
  const released = await postRun(key.secret, { ...co2Acquisition(`${tag}-released`, 1000), instrument: slug })
  const held = await postRun(key.secret, { ...co2Acquisition(`${tag}-held`, 1000), instrument: slug, acquiredAt: '2026-11-30T11:00:00Z' })
  const release = await manager.post(`/api/console/labs/${saltmarsh}/results/${released.result.id}/release`, { comment: 'checked' })
  expect(release.status, JSON.stringify(release.body)).toBe(200)
  await deliveriesSettled(released.id, [okEndpoint.id, goneEndpoint.id])
  await violation(saltmarsh, instrument.id, 'SM-MARBLE')

  // Another lab, another partner, the same troubles.
  const other = await labWithInstrument({ name: `Elsewhere ${tag}` })
  const otherPartner = (await admin.post('/api/console/partners', { slug: unique('elsewhere'), name: `Elsewhere partner ${tag}`, kind: 'data_team', contactEmail: 'else@example.org' })).body
  await admin.post(`/api/console/labs/${other.lab.id}/grants`, { partnerId: otherPartner.id })
  const otherEndpoint = (await admin.post(`/api/console/partners/${otherPartner.id}/endpoints`, { url: `http://127.0.0.1:${sinkPort}/gone/${tag}-other` })).body
  const otherReleased = await postRun(other.key.secret, co2Acquisition(`${tag}-other-released`, 1000))
  await deliveriesSettled(otherReleased.id, [otherEndpoint.id])
  await setRelease(admin, other.lab.id, { releasePolicy: 'review' })
  const otherHeld = await postRun(other.key.secret, co2Acquisition(`${tag}-other-held`, 1000))
  await violation(other.lab.id, other.instrument.id, 'ELSEWHERE-STD')

  return {
    tag, admin, manager, saltmarsh, northgate, instrument, slug, okEndpoint, goneEndpoint, released, held,
    other: { lab: other.lab, instrument: other.instrument, partner: otherPartner, endpoint: otherEndpoint, released: otherReleased, held: otherHeld },
  }
}

/**
 * Takes the scene's troubles out of the demo lab and partner that other test files read
 * (their control-chart panel counts one violation; their webhooks page edits the one endpoint
 * it made): the control points and Northgate's two endpoints (their deliveries go with them).
 * It runs after the file's server and its database client may be gone, so it opens its own
 * connection and never throws: a failed clean-up must not break the file's teardown.
 */
export async function clearScene(scene: Awaited<ReturnType<typeof homeScene>> | undefined) {
  if (!scene) return
  const sql = postgres(testEnv().databaseUrl, { max: 1, onnotice: () => {} })
  try {
    await sql`delete from control_points where instrument_id in (${scene.instrument.id}, ${scene.other.instrument.id})`
    await sql`delete from webhook_endpoints where id in (${scene.okEndpoint.id}, ${scene.goneEndpoint.id})`
  }
  catch (error) { console.warn('clearing the home scene failed:', (error as Error).message) }
  finally { await sql.end() }
}
