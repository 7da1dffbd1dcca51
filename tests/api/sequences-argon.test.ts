import { Webhook } from 'standardwebhooks'
import { describe, expect, it } from 'vitest'
import { ATMOSPHERIC_ARGON, fieldForMz, ionMz, isotope, processRatioSequence, simulateArgonSequence, type SequenceItem } from '../../shared/engine'
import type { MethodDefinition } from '../../shared/schemas/methods'
import { sequenceEventData, sequenceView } from '../../shared/schemas/sequences'
import { labWithInstrument } from '../support/lab'
import { lab } from '../support/sequences'
import { unique, useArcwise } from '../support/server'
import { recordingSink, until } from '../support/webhooks'

// Argon sequences of static multi-collector acquisitions over the API (issue 19): each acquisition
// posts its per-cycle detector columns (volts through the registered feedback resistors, on-peak
// zeros per cycle) with `cycleSeconds`, and on close the server builds the engine's cycles from them
// (server/services/sequences/processing.ts, itemOf → cyclesFromStaticReadings) so that a method
// with a time-zero step runs on real acquisitions.
//
// The beams are simulated from first principles by the engine's simulator
// (shared/engine/isotopes/simulateNobleGas.ts): true ratios; the exponential law of mass
// fractionation, I_meas,i = I_i·(m_i/m_36)^(−β) (Russell et al., Geochim. Cosmochim. Acta 42 (1978)
// 1075) with a known β; first-order consumption by the source since the inlet, faster for the
// lighter isotopes as Knudsen flow (λ_i ∝ 1/√m_i; Knudsen, Ann. Phys. 28 (1909) 75, from memory);
// ion shot noise (Schottky 1918) and resistor Johnson–Nyquist noise (Johnson 1928; Nyquist 1928) on
// every reading; a procedural blank of atmospheric composition in every aliquot. Air (the
// standard) is Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507: 40Ar/36Ar = 298.56,
// 38Ar/36Ar = 0.1885 (the engine's ATMOSPHERIC_ARGON, seeded as reference material AIR-Ar).

const SINK_PORT = 4194
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

const received = await recordingSink(SINK_PORT)

// Collectors at 36Ar⁺, 38Ar⁺ and 40Ar⁺ at one field: r ∝ √(m/z) for a magnetic sector at fixed
// accelerating voltage (non-relativistic to 1e-9 at 5 kV; AME2020 masses through the engine).
const mz = (a: number) => ionMz(isotope(`${a}Ar`).mass, 1)
const R_L = 0.3
const U_V = 5000
/** Feedback resistors (Ω): 1e12 on the small beams 36 and 38, 1e11 on 40, as the simulator assumes. */
const RESISTOR = { 36: 1e12, 38: 1e12, 40: 1e11 } as const
const COLLECTOR = { 36: 'L', 38: 'C', 40: 'H' } as const
const multiCollector = {
  kind: 'multi-collector',
  collectors: ([36, 38, 40] as const).map(a => ({
    id: COLLECTOR[a], effectiveRadius: { value: R_L * Math.sqrt(mz(a) / mz(36)), unit: 'm' }, detector: { type: 'faraday', resistor: { value: RESISTOR[a], unit: 'Ω' } },
  })),
}
const settings = { field: { value: fieldForMz(mz(36), R_L, U_V), unit: 'T' }, acceleratingVoltage: { value: U_V, unit: 'V' } }
/** The amplifiers' offset (V), read on peak-zero every cycle and taken off by the engine. */
const OFFSET_V = 0.002

/** Regress each beam to the inlet (exponential, as the source consumes), take off the blank, correct against air. */
const method: MethodDefinition = {
  gas: 'Ar',
  steps: [{ step: 'time-zero', model: 'exponential' }, { step: 'blank' }, { step: 'mass-bias', law: 'exponential', against: 'standard', material: ATMOSPHERIC_ARGON.id }],
  acceptance: { minAnchors: 1 },
}

/** Two rocks with radiogenic 40Ar over air (invented values) and a 38Ar/36Ar off air's. */
const SAMPLES = [{ '40/36': 450, '38/36': 0.1879 }, { '40/36': 1250, '38/36': 0.1891 }]
const BETA = 0.42

function simulate(seed: number) {
  const air = { role: 'working-standard' as const, material: ATMOSPHERIC_ARGON.id, current40A: 5e-11 }
  return simulateArgonSequence({
    seed, beta: BETA, blank40A: 1e-12, evolution: { kind: 'consumption', ratePerS: 2e-3 }, cycles: 15, firstCycleS: 15, cycleSpacingS: 10,
    items: [{ role: 'blank' }, air, { role: 'sample', truth: SAMPLES[0], current40A: 5e-11 }, { role: 'sample', truth: SAMPLES[1], current40A: 5e-11 }, air, { role: 'blank' }],
  })
}

/** A simulated item as its static acquisition: one column of volts per collector (I·R + offset), a peak-zero per cycle, the cycle times. */
function staticAcquisition(item: SequenceItem, instrument: string, runId: string) {
  const cycles = item.cycles!
  return {
    instrument, runId, acquiredAt: new Date(item.acquiredAt).toISOString(), ...(item.role === 'sample' ? { sampleRef: `ROCK-${item.position}` } : {}),
    settings,
    detectors: ([36, 38, 40] as const).map(a => ({
      collector: COLLECTOR[a], unit: 'V',
      values: cycles.map(c => c.beams[String(a)]! * RESISTOR[a] + OFFSET_V),
      baseline: cycles.map(() => OFFSET_V),
    })),
    cycleSeconds: cycles.map(c => c.t),
    processing: { formulas: ['[36Ar]', '[38Ar]', '[40Ar]'] },
  }
}

function membersOf(items: SequenceItem[], instrument: string, prefix = unique('ar')) {
  return items.map(item => ({
    position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}),
    acquisition: staticAcquisition(item, instrument, `${prefix}-${item.position}`),
  }))
}

async function argonLab() {
  const ctx = await labWithInstrument()
  const instrument = unique('mc').slice(0, 30)
  const created = await ctx.admin.post(`/api/console/labs/${ctx.lab.id}/instruments`, { slug: instrument, name: 'Argon multi-collector', validFrom: '2026-01-01T00:00:00Z', geometry: multiCollector })
  if (created.status !== 201) throw new Error(`registering the instrument answered ${created.status}: ${JSON.stringify(created.body)}`)
  const api = lab(ctx.key.secret)
  const registered = await api.post(`/api/v1/instruments/${instrument}/methods`, { name: 'Argon, time zero, blank, air', validFrom: '2026-01-01T00:00:00Z', definition: method })
  if (registered.status !== 201) throw new Error(`registering the method answered ${registered.status}: ${JSON.stringify(registered.body)}`)
  return { ...ctx, instrument, api, method: registered.body }
}

const stored = async (sql: any, labId: string) => (await sql`
  select (select count(*) from sequences where lab_id = ${labId})::int as sequences,
         (select count(*) from acquisitions where lab_id = ${labId})::int as acquisitions,
         (select count(*) from events where lab_id = ${labId} and type = 'sequence.processed')::int as events`)[0]

describe('an argon sequence of static acquisitions with cycle times', () => {
  it('is regressed to time zero, blank-corrected and corrected against air: the samples\' 40Ar/36Ar and 38Ar/36Ar within k·u of the truth, the steps recorded, and a v2 partner receives them', async () => {
    const { admin, api, lab: l, sql, instrument, method: registered } = await argonLab()
    const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Argon Partner', kind: 'data_team', contactEmail: 'ar@example.org' })).body
    await admin.post(`/api/console/labs/${l.id}/grants`, { partnerId: partner.id })
    const path = `/argon-${unique('x')}`
    const endpoint = await admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${path}` })
    expect(endpoint.status, JSON.stringify(endpoint.body)).toBe(201)
    expect(endpoint.body.schemaVersion).toBe(2)

    const sim = simulate(21)
    const res = await api.post('/api/v1/sequences', { instrument, sequenceId: unique('seq'), acquisitions: membersOf(sim.items, instrument) })
    expect(res.status, JSON.stringify(res.body).slice(0, 800)).toBe(201)
    const view = sequenceView.parse(res.body)
    expect(view).toMatchObject({ status: 'processed', received: sim.items.length, method: { id: registered.id, version: 1 } })
    const outcome = view.outcome!
    expect(outcome.steps.map(s => s.step)).toEqual(['time-zero', 'blank', 'mass-bias'])
    // Time zero ran on the cycles the server built from the posted columns: every acquisition, every beam, the method's model.
    const timeZero = outcome.steps[0]!.parameters as { model: string, fits: { position: number, beam: string, model: string, cycles: number, flags: string[] }[] }
    expect(timeZero.model).toBe('exponential')
    expect(timeZero.fits.length).toBe(sim.items.length * 3)
    for (const item of sim.items) {
      expect(timeZero.fits.filter(f => f.position === item.position).map(f => f.beam).sort()).toEqual(['36', '38', '40'])
    }
    // The aliquots' beams are fitted with the exponential model; a blank's small beams may fall back to the line, flagged (timeZero.ts).
    const blanks = new Set(sim.items.filter(i => i.role === 'blank').map(i => i.position))
    expect(timeZero.fits.every(f => f.cycles === 15 && (f.model === 'exponential' || (blanks.has(f.position) && f.flags.includes('time-zero-linear-at-low-signal'))))).toBe(true)
    expect(timeZero.fits.filter(f => !blanks.has(f.position)).every(f => f.model === 'exponential')).toBe(true)
    expect(outcome.steps[1]!.parameters).toMatchObject({ blanks: [1, 6] })
    expect(outcome.steps[2]!.parameters).toMatchObject({ law: 'exponential', against: 'standard', material: ATMOSPHERIC_ARGON.id })

    // The same engine on the simulated currents themselves: the server's cycles (volts − zero, over R) give the same answer.
    const local = processRatioSequence(method, sim.items, [ATMOSPHERIC_ARGON])
    const samples = sim.items.filter(i => i.role === 'sample')
    expect(samples.length).toBe(2)
    for (const [j, sample] of samples.entries()) {
      const truth = SAMPLES[j]!
      const item = outcome.items.find(i => i.position === sample.position)!
      const mine = local.items.find(i => i.position === sample.position)!
      for (const [q, t] of [['40Ar/36Ar', truth['40/36']], ['38Ar/36Ar', truth['38/36']]] as const) {
        const v = item.final[q]!
        expect(v.scale).toContain('mass-bias corrected')
        expect(v.u).toBeGreaterThan(0)
        expect(v.k).toBeGreaterThan(1.9)
        expect(Math.abs(v.value - t), `${q} at ${sample.position}: ${v.value} ± ${v.k}·${v.u}, truth ${t}`).toBeLessThanOrEqual(v.k * v.u)
        // β = 0.42 shifts 40/36 by (40/36)^0.42 − 1 ≈ 4.5 %: the correction is not a no-op.
        expect(Math.abs(item.raw[q]!.value / t - 1)).toBeGreaterThan(0.01)
        expect(Math.abs(v.value / mine.final[q]!.value - 1)).toBeLessThan(1e-9)
        console.info(`argon ${q} at ${sample.position}: ${v.value.toPrecision(7)} ± ${(v.k * v.u).toPrecision(3)} (k = ${v.k.toFixed(3)}), truth ${t}, error ${((v.value / t - 1) * 1e3).toFixed(3)} ‰, raw ${item.raw[q]!.value.toPrecision(7)}`)
      }
    }

    const message = await until('the sequence.processed message', () => received.find(r => r.path === path && r.body.includes('"sequence.processed"')))
    const payload = new Webhook(endpoint.body.secret).verify(message.body, message.headers) as { type: string, data: unknown }
    const data = sequenceEventData.parse(payload.data)
    expect(data).toMatchObject({ sequenceId: view.sequenceId, method: { version: 1, gas: 'Ar' } })
    expect(data.steps.map(s => s.step)).toEqual(['time-zero', 'blank', 'mass-bias'])
    expect(data.steps[0]!.parameters.model).toBe('exponential')
    expect(data.samples.map(s => s.position)).toEqual(samples.map(s => s.position))
    for (const [j, sample] of samples.entries()) {
      const got = data.samples.find(s => s.position === sample.position)!
      expect(got.sampleRef).toBe(`ROCK-${sample.position}`)
      for (const [q, t] of [['40Ar/36Ar', SAMPLES[j]!['40/36']], ['38Ar/36Ar', SAMPLES[j]!['38/36']]] as const) {
        const v = got.values.find(x => x.quantity === q)!
        expect(v.value).toBe(outcome.items.find(i => i.position === sample.position)!.final[q]!.value)
        expect(Math.abs(v.value - t)).toBeLessThanOrEqual(v.U)
        expect(v.U).toBeCloseTo(v.k * v.u, 12)
      }
    }
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: sim.items.length, events: 1 })
  })
})

describe('cycle times that do not fit, or are missing', () => {
  it('cycleSeconds of the wrong length or not increasing is a 422 naming it, and nothing is stored', async () => {
    const { api, lab: l, sql, instrument } = await argonLab()
    const members = membersOf(simulate(22).items, instrument)
    const post = (changed: typeof members) => api.post('/api/v1/sequences', { instrument, sequenceId: unique('seq'), acquisitions: changed })
    const withTimes = (i: number, cycleSeconds: number[]) => members.map((m, k) => k === i ? { ...m, acquisition: { ...m.acquisition, cycleSeconds } } : m)

    const short = await post(withTimes(2, members[2]!.acquisition.cycleSeconds.slice(1)))
    expect(short.status).toBe(422)
    expect(short.body.errors).toContainEqual(expect.objectContaining({ path: 'acquisitions.2.acquisition.cycleSeconds', message: expect.stringContaining('has 14 times') }))

    const times = [...members[3]!.acquisition.cycleSeconds]
    times[4] = times[3]!
    const flat = await post(withTimes(3, times))
    expect(flat.status).toBe(422)
    expect(flat.body.errors).toContainEqual(expect.objectContaining({ path: 'acquisitions.3.acquisition.cycleSeconds.4', message: 'must be later than the previous cycle' }))

    // Acquisition by acquisition, the same refusal names the member's own field.
    const opened = await api.post('/api/v1/sequences', { instrument, sequenceId: 'argon-one-by-one', length: members.length })
    expect(opened.status).toBe(201)
    const single = await api.post('/api/v1/sequences/argon-one-by-one/acquisitions', { ...members[1]!, acquisition: { ...members[1]!.acquisition, cycleSeconds: [...members[1]!.acquisition.cycleSeconds].reverse() } })
    expect(single.status).toBe(422)
    expect(single.body.errors[0].path).toBe('acquisition.cycleSeconds.1')
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: 0, events: 0 })
  })

  it('a time-zero method over acquisitions without cycleSeconds leaves the sequence failed with a problem naming the position\'s field, and sends nothing', async () => {
    const { api, lab: l, sql, instrument } = await argonLab()
    const members = membersOf(simulate(23).items, instrument).map(({ acquisition: { cycleSeconds: _t, ...acquisition }, ...m }) => ({ ...m, acquisition }))
    const sequenceId = unique('seq')
    const res = await api.post('/api/v1/sequences', { instrument, sequenceId, acquisitions: members })
    expect(res.status).toBe(422)
    expect(res.body.type).toBe('urn:arcwise:problem:sequence-not-processed')
    expect(res.body.errors[0].path).toBe('position.1.acquisition.cycleSeconds')
    expect(res.body.detail).toMatch(/time zero.*cycleSeconds/)
    const view = await api.get(`/api/v1/sequences/${sequenceId}`)
    expect(view.body).toMatchObject({ status: 'failed', outcome: null, failure: { code: 'missing-cycles', field: 'position.1.acquisition.cycleSeconds' } })
    expect(await stored(sql, l.id)).toEqual({ sequences: 1, acquisitions: members.length, events: 0 })
  })
})
