import { Webhook } from 'standardwebhooks'
import { describe, expect, it } from 'vitest'
import { sequenceEventData, sequenceListView, sequenceView } from '../../shared/schemas/sequences'
import { buildSequence, caseMethod, cases } from '../support/deltaSequences'
import { labWithInstrument } from '../support/lab'
import { lab, membersOf, registerMethod } from '../support/sequences'
import { ConsoleClient, unique, useArcwise } from '../support/server'
import { recordingSink, until } from '../support/webhooks'

// Sequences over the API (issue 19): CO2 sequences simulated from first principles by the
// isotope engine's simulator (true δ known; instrument scale compression, offset and drift),
// each acquisition a 1,000-point sweep, processed by the built server against PostgreSQL.

const SINK_PORT = 4191
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

const received = await recordingSink(SINK_PORT)

const co2 = cases.CO2!
/** A CO2 sequence with noise off and standards at their accepted values: the truth is exact. */
const simulated = (seed = 4) => buildSequence(co2, seed, { noise: false, drawStandards: false })

async function co2Lab() {
  const ctx = await labWithInstrument()
  const method = await registerMethod(ctx.key.secret, caseMethod(co2))
  return { ...ctx, method, api: lab(ctx.key.secret) }
}

const stored = async (sql: any, labId: string) => (await sql`
  select (select count(*) from sequences where lab_id = ${labId})::int as sequences,
         (select count(*) from acquisitions where lab_id = ${labId})::int as acquisitions,
         (select count(*) from events where lab_id = ${labId} and type = 'sequence.processed')::int as events`)[0]

describe('a whole sequence', () => {
  it('is processed under the instrument\'s method: samples on VPDB within 0.05 ‰ of the truth, with u, k, the raw δ, the method version, the standards and the normalisation', async () => {
    const { api, lab: l, sql, method } = await co2Lab()
    const built = simulated()
    const res = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(built.items) })
    expect(res.status, JSON.stringify(res.body).slice(0, 800)).toBe(201)
    const view = sequenceView.parse(res.body)
    expect(view).toMatchObject({ status: 'processed', received: built.items.length, declaredLength: built.items.length, flagged: false, method: { id: method.id, version: 1 } })
    expect(view.caution).toContain('quality system')
    const outcome = view.outcome!
    expect(outcome.accepted).toBe(true)
    expect(outcome.normalisation.map(n => n.quantity).sort()).toEqual(['δ13C', 'δ18O'])
    for (const n of outcome.normalisation) expect(n.anchors.map(a => a.material).sort()).toEqual(['IAEA-603', 'LSVEC'])
    expect(outcome.steps.map(s => s.step)).toEqual(['reference-gas', 'oxygen-17', 'drift', 'normalise'])
    for (const sample of built.samples) {
      const item = outcome.items.find(i => i.position === sample.position)!
      for (const q of ['δ13C', 'δ18O']) {
        expect(item.final[q]!.scale).toBe('VPDB')
        expect(Math.abs(item.final[q]!.value - sample.truth[q]!), `${q} at position ${sample.position}`).toBeLessThan(0.05)
        expect(item.final[q]!.u).toBeGreaterThan(0)
        expect(item.final[q]!.k).toBeGreaterThan(0)
        expect(item.raw[q]).toBeDefined()
      }
    }
    const again = await api.get(`/api/v1/sequences/${encodeURIComponent(view.sequenceId)}`)
    expect(again.status).toBe(200)
    expect(again.body).toEqual(res.body)
    const list = await api.get('/api/v1/sequences?status=processed')
    sequenceListView.parse(list.body)
    expect(list.body.items[0]).toMatchObject({ sequenceId: view.sequenceId, methodVersion: 1, accepted: true, received: built.items.length })
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: built.items.length, events: 1 })
  })

  it('is idempotent: the same sequence again replays it, another body under its id is 409, and Idempotency-Key replays the stored answer', async () => {
    const { api, lab: l, sql } = await co2Lab()
    const built = simulated(5)
    const body = { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(built.items) }
    const key = { 'idempotency-key': unique('idem') }
    const first = await api.post('/api/v1/sequences', body, key)
    expect(first.status).toBe(201)
    const replay = await api.post('/api/v1/sequences', body, key)
    expect(replay.status).toBe(201)
    expect(replay.headers.get('idempotent-replayed')).toBe('true')
    const same = await api.post('/api/v1/sequences', body)
    expect(same.status).toBe(200)
    expect(same.body.id).toBe(first.body.id)
    const other = await api.post('/api/v1/sequences', { ...body, acquisitions: body.acquisitions.slice(0, -1) })
    expect(other.status).toBe(409)
    expect(other.body).toMatchObject({ type: 'urn:arcwise:problem:sequence-id-conflict', errors: [{ path: 'sequenceId' }] })
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: built.items.length, events: 1 })
  })
})

describe('a sequence posted acquisition by acquisition', () => {
  it('takes positions out of order, stays open until closed, and is processed on close', async () => {
    const { api, lab: l, sql } = await co2Lab()
    const built = simulated(6)
    const sequenceId = unique('seq')
    const opened = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId, length: built.items.length + 5 })
    expect(opened.status, JSON.stringify(opened.body)).toBe(201)
    expect(opened.body).toMatchObject({ status: 'open', received: 0, declaredLength: built.items.length + 5, outcome: null })
    const members = membersOf(built.items)
    const shuffled = [...members].sort((a, b) => (a.position * 7919) % 13 - (b.position * 7919) % 13 || b.position - a.position)
    expect(shuffled.map(m => m.position)).not.toEqual(members.map(m => m.position))
    for (const m of shuffled) {
      const res = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, m)
      expect(res.status, JSON.stringify(res.body).slice(0, 500)).toBe(201)
      expect(res.body.status).toBe('open')
    }
    const open = await api.get(`/api/v1/sequences/${sequenceId}`)
    expect(open.body).toMatchObject({ status: 'open', received: built.items.length, outcome: null })
    expect(open.body.acquisitions.map((a: any) => a.position)).toEqual(members.map(m => m.position))
    expect((await stored(sql, l.id)).events).toBe(0)

    const closed = await api.post(`/api/v1/sequences/${sequenceId}/close`, {})
    expect(closed.status, JSON.stringify(closed.body).slice(0, 500)).toBe(200)
    expect(closed.body.status).toBe('processed')
    const sample = built.samples[0]!
    expect(Math.abs(closed.body.outcome.items.find((i: any) => i.position === sample.position).final['δ13C'].value - sample.truth['δ13C']!)).toBeLessThan(0.05)
    const late = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, { ...members[0]!, position: built.items.length + 1, acquisition: { ...members[0]!.acquisition, runId: unique('late') } })
    expect(late.status).toBe(409)
    expect(late.body.type).toBe('urn:arcwise:problem:sequence-closed')
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: built.items.length, events: 1 })
  })

  it('closes by itself when its declared length is filled; a taken position is 409 naming the position, the same run again a replay', async () => {
    const { api } = await co2Lab()
    const built = simulated(7)
    const sequenceId = unique('seq')
    await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId, length: built.items.length })
    const members = membersOf(built.items).reverse()
    for (const [i, m] of members.entries()) {
      const res = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, m)
      expect(res.status, JSON.stringify(res.body).slice(0, 500)).toBe(201)
      expect(res.body.status).toBe(i === members.length - 1 ? 'processed' : 'open')
      if (i === 0) {
        const replay = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, m)
        expect(replay.status).toBe(200)
        const taken = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, { ...m, acquisition: { ...m.acquisition, runId: unique('other') } })
        expect(taken.status).toBe(409)
        expect(taken.body).toMatchObject({ type: 'urn:arcwise:problem:position-taken', errors: [{ path: 'position' }] })
        const past = await api.post(`/api/v1/sequences/${sequenceId}/acquisitions`, { ...m, position: built.items.length + 1, acquisition: { ...m.acquisition, runId: unique('past') } })
        expect(past.status).toBe(422)
        expect(past.body.errors[0].path).toBe('position')
      }
    }
  })
})

describe('refusals store nothing', () => {
  it('a duplicate position, an unknown standard, a standard without its material and an unknown method version are refused naming the field', async () => {
    const { api, lab: l, sql } = await co2Lab()
    const built = simulated(8)
    const members = membersOf(built.items)
    const std = members.findIndex(m => m.role === 'working-standard')
    const post = (acquisitions: unknown[], extra: Record<string, unknown> = {}) => api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions, ...extra })

    const duplicate = await post(members.map((m, i) => i === 3 ? { ...m, position: members[1]!.position } : m))
    expect(duplicate.status).toBe(422)
    expect(duplicate.body.errors.map((e: any) => e.path)).toContain('acquisitions.3.position')

    const unknown = await post(members.map((m, i) => i === std ? { ...m, material: 'NOT-A-STANDARD' } : m))
    expect(unknown.status).toBe(422)
    expect(unknown.body).toMatchObject({ type: 'urn:arcwise:problem:unknown-material', errors: [{ path: `acquisitions.${std}.material` }] })

    const bare = await post(members.map((m, i) => i === std ? { position: m.position, role: m.role, acquisition: m.acquisition } : m))
    expect(bare.status).toBe(422)
    expect(bare.body.errors.map((e: any) => e.path)).toContain(`acquisitions.${std}.material`)

    const noVersion = await post(members, { methodVersion: 9 })
    expect(noVersion.status).toBe(422)
    expect(noVersion.body.errors[0].path).toBe('methodVersion')

    const opened = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: 'one-by-one', length: 5 })
    expect(opened.status).toBe(201)
    const single = await api.post('/api/v1/sequences/one-by-one/acquisitions', { ...members[std]!, position: 1, material: 'NOT-A-STANDARD' })
    expect(single.status).toBe(422)
    expect(single.body.errors[0].path).toBe('material')
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: 0, events: 0 })
  })

  it('a sequence on an instrument with no method is refused before anything is stored', async () => {
    const { key, lab: l, sql } = await labWithInstrument()
    const res = await lab(key.secret).post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(simulated(9).items) })
    expect(res.status).toBe(422)
    expect(res.body).toMatchObject({ type: 'urn:arcwise:problem:no-method', errors: [{ path: 'instrument' }] })
    expect((await lab(key.secret).get('/api/v1/instruments/ms-1/method')).status).toBe(404)
    expect(await stored(sql, l.id)).toEqual({ sequences: 0, acquisitions: 0, events: 0 })
  })
})

describe('a method that cannot anchor the scale', () => {
  it('leaves the sequence failed with the reason, answers a problem naming the method\'s field, and sends partners nothing', async () => {
    const { api, lab: l, sql } = await co2Lab()
    const built = simulated(10)
    // LSVEC, the method's second anchor, is not measured in this sequence.
    const items = built.items.filter(i => i.material !== 'LSVEC').map((item, i) => ({ ...item, position: i + 1 }))
    const sequenceId = unique('seq')
    const res = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId, acquisitions: membersOf(items) })
    expect(res.status).toBe(422)
    expect(res.body.type).toBe('urn:arcwise:problem:sequence-not-processed')
    expect(res.body.errors[0].path).toMatch(/^method\.steps\.\d+\.anchors/)
    expect(res.body.detail).toContain('LSVEC')
    const view = await api.get(`/api/v1/sequences/${sequenceId}`)
    expect(view.body).toMatchObject({ status: 'failed', outcome: null, failure: { code: 'anchor-not-in-sequence' } })
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: items.length, events: 0 })
  })
})

describe('control charts', () => {
  it('a standard far from its accepted value breaks the 1-3s rule and flags its sequence', async () => {
    const { api } = await co2Lab()
    // The lab's check standard is the monitor material, registered 2 ‰ away from what it is.
    const standard = await api.post('/api/v1/standards', { code: 'LAB-CHK', name: 'Check gas', values: { 'δ13C': { value: -26.389 + 2, u: 0.02 } }, calibratedAgainst: ['IAEA-603', 'LSVEC'], validFrom: '2026-01-01T00:00:00Z' })
    expect(standard.status, JSON.stringify(standard.body)).toBe(201)
    const built = simulated(11)
    const items = built.items.map(i => i.material === co2.monitor ? { ...i, material: 'LAB-CHK', role: 'monitoring-standard' as const } : i)
    const res = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(items) })
    expect(res.status, JSON.stringify(res.body).slice(0, 500)).toBe(201)
    expect(res.body.flagged).toBe(true)
    expect(res.body.violations).toEqual(expect.arrayContaining([expect.objectContaining({ material: 'LAB-CHK', quantity: 'δ13C', rules: expect.arrayContaining(['1-3s']) })]))
    expect(res.body.outcome.flags.map((f: any) => f.code)).toContain('control-chart-violation')
    const flagged = await api.get('/api/v1/sequences?flagged=true')
    expect(flagged.body.items.map((s: any) => s.sequenceId)).toEqual([res.body.sequenceId])

    const clean = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(simulated(12).items) })
    expect(clean.body).toMatchObject({ status: 'processed', flagged: false, violations: [] })
  })
})

describe('delivery to partners', () => {
  it('an endpoint on result-event v2 receives the normalised δ on VPDB, signed, matching the truth within 0.05 ‰; one on v1 does not', async () => {
    const { admin, api, lab: l } = await co2Lab()
    const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Normalised Partner', kind: 'data_team', contactEmail: 'n@example.org' })).body
    const grant = await admin.post(`/api/console/labs/${l.id}/grants`, { partnerId: partner.id })
    expect(grant.body.eventTypes).toEqual(['result.released', 'result.corrected', 'result.retracted', 'sequence.processed'])
    const v2Path = `/v2-${unique('x')}`
    const v1Path = `/v1-${unique('x')}`
    const v2 = await admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${v2Path}` })
    expect(v2.status, JSON.stringify(v2.body)).toBe(201)
    expect(v2.body.schemaVersion).toBe(2)
    const v1 = await admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${v1Path}`, schemaVersion: 1 })
    expect(v1.status).toBe(201)

    const built = simulated(13)
    const res = await api.post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(built.items) })
    expect(res.status).toBe(201)
    const message = await until('the sequence.processed message', () => received.find(r => r.path === v2Path && r.body.includes('"sequence.processed"')))
    const payload = new Webhook(v2.body.secret).verify(message.body, message.headers) as { type: string, data: unknown }
    expect(payload.type).toBe('sequence.processed')
    const data = sequenceEventData.parse(payload.data)
    expect(data).toMatchObject({ sequenceId: res.body.sequenceId, accepted: true, method: { version: 1, gas: 'CO2' } })
    expect(data.caution).toContain('quality system')
    expect(data.samples.map(s => s.position)).toEqual(built.samples.map(s => s.position))
    for (const sample of built.samples) {
      const got = data.samples.find(s => s.position === sample.position)!
      for (const q of ['δ13C', 'δ18O']) {
        const v = got.values.find(x => x.quantity === q)!
        expect(v.scale).toBe('VPDB')
        expect(Math.abs(v.value - sample.truth[q]!), `${q} at ${sample.position}`).toBeLessThan(0.05)
        expect(v.U).toBeCloseTo(v.k * v.u, 12)
        expect(v.raw).not.toBeNull()
      }
    }
    expect(data.standards.map(s => s.material)).toEqual(expect.arrayContaining(['IAEA-603', 'LSVEC']))
    expect(data.normalisation.length).toBe(2)
    // Results still reach both endpoints; the processed sequence only the one on v2.
    await until('the results on v1', () => received.filter(r => r.path === v1Path).length >= built.items.length)
    await new Promise(r => setTimeout(r, 1000))
    expect(received.filter(r => r.path === v1Path).every(r => r.body.includes('"result.released"'))).toBe(true)
    const schema = await new ConsoleClient().get('/api/v1/schemas/result-event/1')
    expect(schema.headers.get('sunset')).toBeTruthy()
  })
})
