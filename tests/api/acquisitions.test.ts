import { describe, expect, it } from 'vitest'
import { acquisitionListView, acquisitionView, engineResultView, problemDocument } from '../../shared/schemas/responses'
import { fieldForMz, ionMz, isotope, simulateStatic } from '../../shared/engine'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

await useArcwise()

const post = (secret: string, body: unknown, headers: Record<string, string> = {}) =>
  new ConsoleClient().request('POST', '/api/v1/acquisitions', body, { ...bearer(secret), ...headers })
const get = (secret: string, path: string) => new ConsoleClient().request('GET', path, undefined, bearer(secret))
const countRows = async (sql: any, labId: string) => (await sql`select (select count(*) from acquisitions where lab_id = ${labId})::int as a, (select count(*) from events where lab_id = ${labId})::int as e`)[0]

describe('POST /api/v1/acquisitions', () => {
  it('normalises a sweep to m/z, assigns CO2 and 13CO2, and reports δ13C with its uncertainty and the versions used', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const res = await post(key.secret, co2Acquisition())
    expect(res.status, JSON.stringify(res.body)).toBe(201)
    // The answer matches its documented schema (the OpenAPI document is generated from it).
    acquisitionView.parse(res.body)
    const r = res.body.result
    expect(r.points).toBe(4000)
    expect(r.mzRange[0]).toBeCloseTo(43, 1)
    const species = r.peaks.map((p: any) => p.assignment?.species)
    expect(species).toEqual(expect.arrayContaining(['CO2', '[13C]O2']))
    const co2 = r.peaks.find((p: any) => p.assignment?.species === 'CO2')
    // CO2⁺ at (43.98982924 − m_e) u/e: AME2020 masses (from memory), CODATA 2022 m_e.
    expect(Math.abs(co2.centroid - (43.98982924 - 0.00054858))).toBeLessThan(43.99 * 20e-6)
    expect(co2.assignment.errorPpm).toBeLessThan(20)
    expect(r.ratios[0]).toMatchObject({ deltaName: 'δ13C', standard: 'VPDB' })
    expect(r.ratios[0].deltaPermil).toBeCloseTo(-10, 0)
    expect(r.ratios[0].deltaU).toBeGreaterThan(0)
    expect(r.versions).toEqual({ engine: '2.0.1', constants: 'CODATA 2022', geometry: 1, calibration: null, method: null })
    expect(r.physics).toEqual({ relativistic: true, compatibility: '2.x' })
    expect(r.qc.map((q: any) => q.code)).toContain('uncalibrated')
    expect(await countRows(sql, lab.id)).toEqual({ a: 1, e: 1 })
    const [peakRows] = await sql<[{ n: number }]>`select count(*)::int as n from peaks where lab_id = ${lab.id}`
    expect(peakRows.n).toBe(r.peaks.length)
    const [event] = await sql`select sequence::int as sequence, type from events where lab_id = ${lab.id}`
    expect(event).toEqual({ sequence: 1, type: 'result.released' })
  })

  it('on request, a ratio carries its GUM Supplement 1 95 % coverage interval, as documented; without, none', async () => {
    const { key } = await labWithInstrument()
    const plain = co2Acquisition()
    const res = await post(key.secret, { ...plain, processing: { ...plain.processing, monteCarlo: true } })
    expect(res.status, JSON.stringify(res.body)).toBe(201)
    acquisitionView.parse(res.body)
    const r = res.body.result.ratios[0]
    expect(r.coverage).toMatchObject({ method: 'GUM-S1 Monte Carlo (JCGM 101:2008)', p: 0.95, trials: 200_000 })
    expect(r.coverage.interval[0]).toBeLessThan(r.ratio)
    expect(r.coverage.interval[1]).toBeGreaterThan(r.ratio)
    expect(r.coverage.deltaInterval[0]).toBeLessThan(r.deltaPermil)
    expect(r.coverage.deltaInterval[1]).toBeGreaterThan(r.deltaPermil)
    // Near-linear here (13CO2 at S/N in the thousands): k near the normal 1.96.
    expect(r.coverage.k).toBeGreaterThan(1.9)
    expect(r.coverage.k).toBeLessThan(2.02)
    const without = await post(key.secret, co2Acquisition())
    expect(without.body.result.ratios[0].coverage).toBeUndefined()
  })

  it('ranks the reference spectra an acquisition sends by the similarity of its normalised peak heights; a bad stick is named and nothing stored', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const plain = co2Acquisition()
    // CO2 with its 13C isotopologue at the VPDB ratio (heights), and a pattern with no line in common.
    const references = [
      { id: 'argon', name: 'Argon only', sticks: [{ mz: 39.96, intensity: 1 }] },
      { id: 'co2', name: 'Carbon dioxide', sticks: [{ mz: 43.99, intensity: 1 }, { mz: 44.99, intensity: 0.011 }] },
    ]
    const res = await post(key.secret, { ...plain, processing: { ...plain.processing, references } })
    expect(res.status, JSON.stringify(res.body)).toBe(201)
    acquisitionView.parse(res.body)
    const matches = res.body.result.matches
    expect(matches.map((m: any) => m.id)).toEqual(['co2', 'argon'])
    expect(matches[0].similarity).toBeGreaterThan(0.999)
    expect(matches[1].similarity).toBe(0)
    const without = await post(key.secret, co2Acquisition())
    expect(without.body.result.matches).toEqual([])
    const before = (await countRows(sql, lab.id)).a
    const bad = await post(key.secret, { ...co2Acquisition(), processing: { references: [{ id: 'x', name: 'x', sticks: [{ mz: -1, intensity: 1 }] }] } })
    expect(bad.status).toBe(422)
    problemDocument.parse(bad.body)
    expect(bad.body.errors[0].path).toBe('processing.references.0.sticks.0.mz')
    expect((await countRows(sql, lab.id)).a).toBe(before)
  })

  it('takes on-peak-zero readings or baseline regions, and every peak number comes with its uncertainty', async () => {
    const { key } = await labWithInstrument()
    const body = co2Acquisition()
    const zero = await post(key.secret, { ...body, baseline: { zero: [{ unit: 'fA', values: [5.1, 4.9, 5.0, 5.2, 4.8] }] } })
    expect(zero.status, JSON.stringify(zero.body).slice(0, 300)).toBe(201)
    acquisitionView.parse(zero.body)
    expect(zero.body.result.baseline).toMatchObject({ source: 'zero', points: 5, noiseModel: 'gaussian' })
    expect(zero.body.result.baseline.level).toBeCloseTo(5e-15, 17)
    const regions = await post(key.secret, { ...co2Acquisition(), baseline: { regions: [{ mzFrom: 43, mzTo: 43.8 }, { mzFrom: 45.2, mzTo: 46.5 }] } })
    expect(regions.body.result.baseline.source).toBe('regions')
    const co2 = regions.body.result.peaks.find((p: any) => p.assignment?.species === 'CO2')
    for (const field of ['centroidU', 'heightU', 'areaU', 'fwhmU', 'resolvingPowerU', 'resolvingPower10ValleyU']) expect(co2[field], field).toBeGreaterThan(0)
    expect(co2.assignment.impliedNeutralMassU).toBeGreaterThan(0)
    // A Gaussian's 10 % valley resolving power is m/FWHM / 2.079 (width at 5 % height).
    expect(co2.resolvingPower / co2.resolvingPower10Valley).toBeCloseTo(2.079, 2)
    expect(regions.body.result.ratios[0]).toMatchObject({ referenceRatio: 0.0111802, referenceRatioU: 0.0000028 })
  })

  it('engine 1.x on request: CODATA 2018 and the non-relativistic relation, as engine 1.0.0 computed', async () => {
    const { key } = await labWithInstrument()
    const now = await post(key.secret, co2Acquisition(unique('v2'), 2000))
    const body = co2Acquisition(unique('v1'), 2000)
    const old = await post(key.secret, { ...body, processing: { ...body.processing, engine: '1.x' } })
    expect(old.status, JSON.stringify(old.body)).toBe(201)
    expect(old.body.result.versions.constants).toBe('CODATA 2018')
    expect(old.body.result.physics).toEqual({ relativistic: false, compatibility: '1.x' })
    // At 3 kV the relativistic term and the 2022 m_u move CO2⁺ by about 0.04 ppm: engine 1.x reads higher.
    const shift = old.body.result.mzRange[0] / now.body.result.mzRange[0] - 1
    expect(shift).toBeGreaterThan(0.02e-6)
    expect(shift).toBeLessThan(0.1e-6)
    const bad = await post(key.secret, { ...body, runId: unique('v0'), processing: { ...body.processing, engine: '0.x' } })
    expect(bad.status).toBe(422)
    expect(bad.body.errors[0].path).toBe('processing.engine')
  })

  it('static multi-collector in volts through registered resistors, with on-peak zeros: ratios cycle by cycle, detectors reported; bad detector input names its field and stores nothing', async () => {
    const { admin, lab, key, sql } = await labWithInstrument()
    // Collectors at 36Ar⁺ and 40Ar⁺ for B = 0.48 T at 5 kV, r ∝ √(m/z) (radii computed with the engine's own inverse).
    const mzL = ionMz(isotope('36Ar').mass, 1)
    const mzH = ionMz(isotope('40Ar').mass, 1)
    const B = fieldForMz(mzL, 0.3, 5000)
    const slug = unique('mc').slice(0, 30)
    const created = await admin.post(`/api/console/labs/${lab.id}/instruments`, { slug, name: 'Multi one', validFrom: '2026-01-01T00:00:00Z', geometry: {
      kind: 'multi-collector', collectors: [
        { id: 'L', effectiveRadius: { value: 0.3, unit: 'm' }, detector: { type: 'faraday', resistor: { value: 100, unit: 'GΩ', u: 0.02 } } },
        { id: 'H', effectiveRadius: { value: 0.3 * Math.sqrt(mzH / mzL), unit: 'm' }, detector: { type: 'faraday', resistor: { value: 10, unit: 'GΩ', u: 0.002 }, gain: { value: 1.001, u: 0.0001, calibratedOn: '2026-11-01' } } },
      ] } })
    expect(created.status, JSON.stringify(created.body)).toBe(201)
    const sim = simulateStatic({ seed: 9, cycles: 40, integrationS: 4, lightSignal: 1e-12, commonFluctuation: 0.02, baseline: { mode: 'per-cycle' }, cups: [
      { id: 'L', relative: 1, detector: { type: 'faraday', resistorOhm: 1e11, offsetA: 2e-15, readAs: 'V' } },
      { id: 'H', relative: 298.56, detector: { type: 'faraday', resistorOhm: 1e10, offsetA: 2e-15, readAs: 'V', gain: 1.001 } },
    ] })
    const body = {
      instrument: slug, runId: unique('static'), acquiredAt: '2026-11-30T10:00:00Z',
      settings: { field: { value: B, unit: 'T' }, acceleratingVoltage: { value: 5, unit: 'kV' } },
      detectors: sim.detectors,
      processing: { formulas: ['[36Ar]', '[40Ar]'], ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[40Ar]', light: '[36Ar]' }] },
    }
    const res = await post(key.secret, body)
    expect(res.status, JSON.stringify(res.body)).toBe(201)
    acquisitionView.parse(res.body)
    const r = res.body.result
    expect(r.mode).toBe('static')
    expect(r.cycles).toMatchObject({ count: 40 })
    // A static reading has no profile: its width and resolving power are not estimated (null, not 0).
    expect(r.peaks.map((p: any) => [p.fwhm, p.fwhmU, p.resolvingPower, p.resolvingPower10Valley])).toEqual([[null, null, null, null], [null, null, null, null]])
    expect(r.detectors.map((d: any) => [d.collector, d.type, d.baseline.mode])).toEqual([['L', 'faraday', 'per-cycle'], ['H', 'faraday', 'per-cycle']])
    const ratio = r.ratios[0]
    expect(ratio.cycles).toMatchObject({ cycles: 40, used: 40, rejected: 0, dof: 39 })
    // The 2 % beam fluctuation cancels cycle by cycle: u is the cycle SE with the resistors' and gain's u, far below 2 % of the ratio.
    expect(ratio.ratioU).toBeLessThan(298.56 * 0.002)
    expect(Math.abs(ratio.ratio - 298.56)).toBeLessThan(3 * ratio.ratioU)
    expect(ratio.cycles.systematicU).toBeGreaterThan(0)

    const before = (await countRows(sql, lab.id)).a
    const noResistor = await post(key.secret, { ...body, runId: unique('static-bad'), instrument: 'ms-1', settings: { ...body.settings }, detectors: [{ unit: 'V', values: [0.1, 0.1] }] })
    expect(noResistor.status).toBe(422)
    expect(noResistor.body.errors[0].path).toBe('detectors.0.unit')
    const noDwell = await post(key.secret, { ...body, runId: unique('static-bad'), detectors: [{ collector: 'L', unit: 'counts', values: [10, 12] }] })
    expect(noDwell.status).toBe(422)
    expect(noDwell.body.errors[0].path).toBe('detectors.0.dwell')
    expect((await countRows(sql, lab.id)).a).toBe(before)
  })

  it('uses the geometry version valid at acquiredAt', async () => {
    const { admin, lab, instrument, key } = await labWithInstrument()
    await admin.post(`/api/console/labs/${lab.id}/instruments/${instrument.id}/geometry-versions`, {
      geometry: { kind: 'potential-sector', analyzerRadius: { value: 27.5, unit: 'cm' } }, validFrom: '2026-11-15T00:00:00Z',
    })
    const before = await post(key.secret, { ...co2Acquisition(), acquiredAt: '2026-11-01T00:00:00Z' })
    const after = await post(key.secret, { ...co2Acquisition(), acquiredAt: '2026-11-30T00:00:00Z' })
    expect(before.body.result.versions.geometry).toBe(1)
    expect(after.body.result.versions.geometry).toBe(2)
    // m/z + U/2c²·e/m_u ∝ r² (the exact relation, Jackson 1999 §12.1): the larger radius reads (27.5/27)² higher.
    // e exact; c exact; m_u CODATA 2022 (Mohr et al., Rev. Mod. Phys. 97 (2025) 025002).
    const k = 3000 / (2 * 299792458 ** 2) * 1.602176634e-19 / 1.66053906892e-27
    const m1 = before.body.result.mzRange[0]
    expect(after.body.result.mzRange[0] / m1).toBeCloseTo(((27.5 / 27) ** 2 * (m1 + k) - k) / m1, 12)
    const early = await post(key.secret, { ...co2Acquisition(), acquiredAt: '2025-06-01T00:00:00Z' })
    expect(early.status).toBe(422)
    expect(early.body.errors[0].path).toBe('acquiredAt')
  })

  it('many acquisitions of two labs at once: each written whole, each lab\'s events numbered 1..n without a gap, a run id sent twice at once kept single', async () => {
    // The server writes the acquisitions accepted in one turn of its event loop with one
    // statement; what a lab sees must be as if each had been written alone.
    const a = await labWithInstrument()
    const b = await labWithInstrument()
    const twice = co2Acquisition(unique('twice'), 600)
    const posts = [
      ...Array.from({ length: 10 }, () => ({ lab: a, res: post(a.key.secret, co2Acquisition(unique('run'), 600)) })),
      ...Array.from({ length: 10 }, () => ({ lab: b, res: post(b.key.secret, co2Acquisition(unique('run'), 600)) })),
      { lab: a, res: post(a.key.secret, twice) }, { lab: a, res: post(a.key.secret, twice) },
    ]
    const answers = await Promise.all(posts.map(async p => ({ lab: p.lab, res: await p.res })))
    expect(answers.map(x => x.res.status).sort()).toEqual([...Array(21).fill(201), 200].sort())
    const sql = a.sql
    for (const [lab, n] of [[a.lab, 11], [b.lab, 10]] as const) {
      const seqs = await sql`select sequence::int as s from events where lab_id = ${lab.id} order by sequence`
      expect(seqs.map((r: any) => r.s)).toEqual(Array.from({ length: n }, (_, i) => i + 1))
      expect(await countRows(sql, lab.id)).toEqual({ a: n, e: n })
    }
    // Every answer is its own acquisition's, and its event carries the same result.
    for (const { lab, res } of answers) {
      const [row] = await sql`select a.external_id, e.payload->>'id' as event_of, (select count(*)::int from peaks p join results r on r.id = p.result_id where r.acquisition_id = a.id) as peaks
        from acquisitions a join results r on r.acquisition_id = a.id join events e on e.payload->>'id' = a.id::text where a.id = ${res.body.id} and a.lab_id = ${lab.lab.id}`
      expect(row).toEqual({ external_id: res.body.runId, event_of: res.body.id, peaks: res.body.result.peaks.length })
    }
  })

  it('the same run id with the same body replays; with another body, 409', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const first = await post(key.secret, body)
    const again = await post(key.secret, body)
    expect(again.status).toBe(200)
    expect(again.body.id).toBe(first.body.id)
    const changed = await post(key.secret, { ...body, sampleRef: 'OTHER' })
    expect(changed.status).toBe(409)
    expect(changed.body.errors[0].path).toBe('runId')
    expect(await countRows(sql, lab.id)).toEqual({ a: 1, e: 1 })
  })

  it('Idempotency-Key: same key and body replays the answer, another body is 422 (IETF draft)', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const idem = unique('idem')
    const first = await post(key.secret, body, { 'idempotency-key': idem })
    const replay = await post(key.secret, body, { 'idempotency-key': idem })
    expect(first.status).toBe(201)
    expect(replay.status).toBe(201)
    expect(replay.headers.get('idempotent-replayed')).toBe('true')
    expect(replay.body).toEqual(first.body)
    const other = await post(key.secret, co2Acquisition(), { 'idempotency-key': idem })
    expect(other.status).toBe(422)
    expect(other.body.type).toBe('urn:arcwise:problem:idempotency-key-reused')
    expect(await countRows(sql, lab.id)).toEqual({ a: 1, e: 1 })
  })

  it('Idempotency-Key left in flight by a process that died is taken over by a retry after 30 s, and the run is stored once', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const idem = unique('idem-stuck')
    const first = await post(key.secret, body, { 'idempotency-key': idem })
    expect(first.status).toBe(201)
    // What a process killed after storing the acquisition but before answering leaves behind.
    await sql`update idempotency_keys set state = 'in-flight', response_status = null, response_body = null, created_at = now() - interval '5 seconds' where key = ${idem}`
    const early = await post(key.secret, body, { 'idempotency-key': idem })
    expect(early.status).toBe(409)
    expect(early.body.type).toBe('urn:arcwise:problem:idempotency-key-in-flight')
    await sql`update idempotency_keys set created_at = now() - interval '31 seconds' where key = ${idem}`
    const retry = await post(key.secret, body, { 'idempotency-key': idem })
    // The run id was stored already: the retry gets its result, not a second acquisition.
    expect(retry.status).toBe(200)
    expect(retry.body.id).toBe(first.body.id)
    expect(await countRows(sql, lab.id)).toEqual({ a: 1, e: 1 })
  })

  it.each([
    ['wrong types', (b: any) => ({ ...b, acquiredAt: 12 }), 'acquiredAt'],
    ['a date that cannot be', (b: any) => ({ ...b, acquiredAt: '2026-02-30T10:00:00Z' }), 'acquiredAt'],
    ['columns of different lengths', (b: any) => ({ ...b, detectors: [{ unit: 'fA', values: b.detectors[0].values.slice(1) }] }), 'detectors.0.values'],
    ['null in a column', (b: any) => ({ ...b, sweep: { ...b.sweep, values: [null, ...b.sweep.values.slice(1)] } }), 'sweep.values.0'],
    ['an unknown unit', (b: any) => ({ ...b, sweep: { ...b.sweep, unit: 'tesla-ish' } }), 'sweep.unit'],
    ['a negative voltage', (b: any) => ({ ...b, settings: { acceleratingVoltage: { value: -3, unit: 'kV' } } }), 'settings.acceleratingVoltage.value'],
    ['a sweep that goes back', (b: any) => ({ ...b, sweep: { ...b.sweep, values: [...b.sweep.values.slice(0, -1), b.sweep.values[0]] } }), 'sweep.values.3999'],
    ['an attempt to set labId', (b: any) => ({ ...b, labId: '7f1c9a52-0c1e-4b8e-9a4e-2f0d3c1b5a61' }), ''],
    ['an attempt to set status', (b: any) => ({ ...b, status: 'processed' }), ''],
    ['an unknown instrument', (b: any) => ({ ...b, instrument: 'not-ours' }), 'instrument'],
    ['a baseline region that ends before it starts', (b: any) => ({ ...b, baseline: { regions: [{ mzFrom: 46, mzTo: 45 }] } }), 'baseline.regions.0.mzTo'],
    ['baseline regions that hold no point of the sweep', (b: any) => ({ ...b, baseline: { regions: [{ mzFrom: 100, mzTo: 101 }] } }), 'baseline.regions'],
    ['zero readings in a unit of another kind', (b: any) => ({ ...b, baseline: { zero: [{ unit: 'cps', values: [1, 2] }] } }), 'baseline.zero.0.unit'],
  ])('refuses %s naming the field, and stores nothing', async (_what, spoil, path) => {
    const { key, lab, sql } = await labWithInstrument()
    const res = await post(key.secret, spoil(co2Acquisition()))
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBeGreaterThanOrEqual(400)
    expect(res.status).toBeLessThan(500)
    expect(res.headers.get('content-type')).toContain('application/problem+json')
    problemDocument.parse(res.body)
    if (path) expect(res.body.errors.map((e: any) => e.path)).toContain(path)
    else expect(res.body.errors[0].message).toMatch(/[Uu]nrecognized key/)
    expect(await countRows(sql, lab.id)).toEqual({ a: 0, e: 0 })
  })

  it('malformed JSON is a 400 problem document', async () => {
    const { key } = await labWithInstrument()
    const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', '{"instrument":', { ...bearer(key.secret), 'content-type': 'application/json' })
    expect(res.status).toBe(400)
  })
})

describe('lab keys', () => {
  it('a wrong, revoked or expired key gets the same 401; a missing scope is 403', async () => {
    const { admin, lab, key, sql } = await labWithInstrument()
    const wrong = await post(`${key.secret.slice(0, -4)}AAAA`, co2Acquisition())
    await admin.delete(`/api/console/labs/${lab.id}/keys/${key.id}`)
    const revoked = await post(key.secret, co2Acquisition())
    const expiring = (await admin.post(`/api/console/labs/${lab.id}/keys`, { name: 'soon', scopes: ['acquisitions:write'], expiresAt: new Date(Date.now() + 60_000).toISOString() })).body
    await sql`update api_keys set expires_at = now() - interval '1 second' where id = ${expiring.id}`
    const expired = await post(expiring.secret, co2Acquisition())
    const strip = ({ instance: _i, ...rest }: any) => rest
    for (const r of [wrong, revoked, expired]) expect(r.status).toBe(401)
    expect(strip(revoked.body)).toEqual(strip(wrong.body))
    expect(strip(expired.body)).toEqual(strip(wrong.body))

    const readOnly = (await admin.post(`/api/console/labs/${lab.id}/keys`, { name: 'reader', scopes: ['results:read'] })).body
    expect((await post(readOnly.secret, co2Acquisition())).status).toBe(403)
  })

  it('lists keys with prefix and last use, never a hash or the secret', async () => {
    const { admin, lab, key } = await labWithInstrument()
    await post(key.secret, co2Acquisition())
    const list = await admin.get(`/api/console/labs/${lab.id}/keys`)
    expect(list.body.items).toHaveLength(1)
    const [item] = list.body.items
    expect(item.prefix).toBe(key.secret.slice(4, 16))
    expect(item.lastUsedAt).not.toBeNull()
    expect(JSON.stringify(list.body)).not.toContain(key.secret)
    expect(Object.keys(item)).not.toContain('secretHash')
  })
})

describe('reads are scoped to the key\'s lab (OWASP API1:2023)', () => {
  it('lists, reads and exports its own acquisitions; another lab\'s key gets 404', async () => {
    const mine = await labWithInstrument()
    const theirs = await labWithInstrument()
    const ids: string[] = []
    for (let i = 0; i < 3; i++) ids.push((await post(mine.key.secret, co2Acquisition())).body.id)
    const page1 = await get(mine.key.secret, '/api/v1/acquisitions?limit=2')
    acquisitionListView.parse(page1.body)
    expect(page1.body.items.map((a: any) => a.id)).toEqual([ids[2], ids[1]])
    const page2 = await get(mine.key.secret, `/api/v1/acquisitions?limit=2&cursor=${page1.body.nextCursor}`)
    expect(page2.body.items.map((a: any) => a.id)).toEqual([ids[0]])
    expect(page2.body.nextCursor).toBeNull()

    expect((await get(mine.key.secret, `/api/v1/acquisitions/${ids[0]}`)).status).toBe(200)
    const result = (await get(mine.key.secret, `/api/v1/acquisitions/${ids[0]}/result`)).body
    engineResultView.parse(result)
    expect(result.peaks.length).toBeGreaterThan(0)
    for (const path of [`/api/v1/acquisitions/${ids[0]}`, `/api/v1/acquisitions/${ids[0]}/result`, `/api/v1/acquisitions/${ids[0]}/spectrum.csv`]) {
      const res = await get(theirs.key.secret, path)
      expect(res.status).toBe(404)
      expect(JSON.stringify(res.body)).not.toContain(mine.lab.id)
    }
    expect((await get(theirs.key.secret, '/api/v1/acquisitions')).body.items).toEqual([])
  })

  it('exports the spectrum as CSV and as JCAMP-DX that jcampconverter (npm) reads back', async () => {
    const { key } = await labWithInstrument()
    const id = (await post(key.secret, co2Acquisition())).body.id
    const csv = await get(key.secret, `/api/v1/acquisitions/${id}/spectrum.csv`)
    expect(csv.headers.get('content-type')).toContain('text/csv')
    // `#` lines first say what the file is (tests/api/certificates.test.ts reads them).
    const lines = String(csv.body).trim().split('\n').filter(l => !l.startsWith('#'))
    expect(lines[0]).toBe('mz,signal_A')
    expect(lines).toHaveLength(4001)
    const jdx = await get(key.secret, `/api/v1/acquisitions/${id}/spectrum.jdx`)
    const { convert } = await import('jcampconverter')
    const parsed = convert(String(jdx.body)).flatten[0]!
    expect(parsed.dataType).toBe('MASS SPECTRUM')
    const data = parsed.spectra[0]!.data as { x: number[], y: number[] }
    expect(data.x).toHaveLength(4000)
    expect(data.x[0]).toBeCloseTo(Number(lines[1]!.split(',')[0]), 6)
    expect(data.x.at(-1)).toBeCloseTo(Number(lines.at(-1)!.split(',')[0]), 6)
    // The tallest point of the resampled profile is the CO2⁺ peak near m/z 43.989.
    const top = data.y.indexOf(Math.max(...data.y))
    expect(data.x[top]).toBeCloseTo(43.989, 1)
  })
})
