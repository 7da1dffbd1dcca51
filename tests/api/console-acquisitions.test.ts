import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { acquisitionListView, acquisitionView } from '../../shared/schemas/responses'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument, referenceAcquisition, sectorGeometry } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

await useArcwise()

const postWithKey = (secret: string, body: unknown) => new ConsoleClient().request('POST', '/api/v1/acquisitions', body, bearer(secret))
const as = (role: 'admin' | 'lab_manager' | 'integrator' | 'viewer') => new ConsoleClient().signIn(demoUser(role).email, demoUser(role).password)

// Constants for checks made here, not by the engine: the elementary charge and c are exact
// since the 2019 SI; m_u = 1.66053906892e-27 kg and m_e = 5.485799090441e-4 u are CODATA 2022
// (Mohr et al., Rev. Mod. Phys. 97 (2025) 025002); the 12C, 14N, 16O and 40Ar masses are
// AME2020 (from memory).
const E = 1.602176634e-19
const C = 299792458
const MU = 1.66053906892e-27
const ME = 5.485799090441e-4
const MASS = { C12: 12, N14: 14.00307400425, O16: 15.99491461926, Ar40: 39.9623831237 }

describe('acquisitions in the console', () => {
  it('lists a lab\'s acquisitions with filters, both orders and cursor pages', async () => {
    const { admin, lab, key } = await labWithInstrument()
    const runs = [['r-old', '2026-11-28T09:00:00Z'], ['r-new', '2026-11-30T09:00:00Z'], ['r-mid', '2026-11-29T09:00:00Z']] as const
    for (const [runId, acquiredAt] of runs) expect((await postWithKey(key.secret, { ...co2Acquisition(runId, 1500), acquiredAt })).status).toBe(201)
    const base = `/api/console/labs/${lab.id}/acquisitions`
    const received = await admin.get(`${base}?limit=2`)
    acquisitionListView.parse(received.body)
    expect(received.body.items.map((a: any) => a.runId)).toEqual(['r-mid', 'r-new'])
    const byAcquired = await admin.get(`${base}?sort=acquired&limit=2`)
    expect(byAcquired.body.items.map((a: any) => a.runId)).toEqual(['r-new', 'r-mid'])
    const next = await admin.get(`${base}?sort=acquired&limit=2&cursor=${byAcquired.body.nextCursor}`)
    expect(next.body.items.map((a: any) => a.runId)).toEqual(['r-old'])
    expect(next.body.nextCursor).toBeNull()
    const window = await admin.get(`${base}?from=2026-11-29T00:00:00Z&to=2026-11-29T23:59:59Z`)
    expect(window.body.items.map((a: any) => a.runId)).toEqual(['r-mid'])
    const badSort = await admin.get(`${base}?sort=sideways`)
    expect(badSort.status).toBe(400)
    expect(badSort.body.errors[0].path).toBe('sort')
  })

  it('shows one acquisition with its versions, the start of its raw payload, and its spectrum as float64 m/z from the registered geometry', async () => {
    const { admin, lab, key, sql } = await labWithInstrument()
    const body = co2Acquisition(unique('detail'), 3000)
    const posted = await postWithKey(key.secret, body)
    const base = `/api/console/labs/${lab.id}/acquisitions/${posted.body.id}`
    const detail = await admin.get(base)
    expect(detail.status).toBe(200)
    const { instrumentId, instrumentName, geometryKind, payload, rawData, reviewComment, submittedBy, requestId, ...view } = detail.body
    acquisitionView.parse(view)
    expect({ instrumentName, geometryKind }).toEqual({ instrumentName: 'Sector one', geometryKind: 'potential-sector' })
    // Posted with a lab key, not reviewed yet: no uploader, no comment.
    expect({ reviewComment, submittedBy }).toEqual({ reviewComment: null, submittedBy: null })
    expect(instrumentId).toMatch(/^[0-9a-f-]{36}$/)
    // Posted without X-Request-Id: the id the hub made for that request is kept (issue 23).
    expect(requestId).toMatch(/^[0-9a-f-]{36}$/)
    // The start of the body as the lab sent it, from the object store (issue 23).
    const [stored] = await sql<[{ bytes: number }]>`select raw_bytes::int as bytes from acquisitions where id = ${posted.body.id}`
    expect(rawData).toMatchObject({ kept: 'object-store', bytes: stored.bytes, contentType: 'application/json' })
    expect(payload).toMatchObject({ chars: stored.bytes, truncated: true })
    expect(payload.head.startsWith('{')).toBe(true)
    expect(payload.head).toContain(`"runId":"${body.runId}"`)

    const res = await fetch(url(`${base}/spectrum`), { headers: { cookie: admin.cookie } })
    expect(res.headers.get('content-type')).toBe('application/octet-stream')
    expect(res.headers.get('x-signal-unit')).toBe('A')
    const buffer = await res.arrayBuffer()
    expect(buffer.byteLength).toBe(3000 * 16)
    const mz = new Float64Array(buffer, 0, 3000)
    const signal = new Float64Array(buffer, 3000 * 8, 3000)
    // m/z = ((rB)² / 2U − U/2c²) · e/m_u for a magnetic sector at accelerating potential U, the
    // exact relativistic relation (Jackson, Classical Electrodynamics, 3rd ed., 1999, §12.1).
    const r = sectorGeometry.analyzerRadius.value / 100
    const expected = (B: number) => ((r * B) ** 2 / (2 * 3000) - 3000 / (2 * C * C)) * E / MU
    expect(Math.abs(mz[0]! / expected(body.sweep.values[0]!) - 1)).toBeLessThan(1e-12)
    expect(Math.abs(mz[2999]! / expected(body.sweep.values[2999]!) - 1)).toBeLessThan(1e-12)
    expect(signal[10]).toBeCloseTo(body.detectors[0]!.values[10]! * 1e-15, 25)

    const csv = await fetch(url(`${base}/spectrum.csv`), { headers: { cookie: admin.cookie } })
    expect(csv.headers.get('content-disposition')).toBe(`attachment; filename="${body.runId}.csv"`)
    expect((await csv.text()).trim().split('\n').filter(l => !l.startsWith('#'))).toHaveLength(3001)
    const raw = await fetch(url(`${base}/payload.json`), { headers: { cookie: admin.cookie } })
    expect(JSON.parse(await raw.text())).toEqual(body)
  })

  it('takes a file uploaded in the console, with metadata the file lacks from the form, and records who uploaded it', async () => {
    const { admin, lab, sql } = await labWithInstrument()
    const runId = unique('console-upload')
    const ref = referenceAcquisition(runId)
    const csv = ['# acceleratingVoltage: 3 kV ± 0.0006', '# formulas: CO2, [13C]O2, N2, [40Ar]', 'field [T],detector [fA]', ...ref.sweep.values.map((b, i) => `${b},${ref.detectors[0]!.values[i]}`)].join('\n')
    const form = new FormData()
    form.append('file', new Blob([csv], { type: 'text/csv' }), 'reference.csv')
    const q = new URLSearchParams({ instrument: 'ms-1', runId, acquiredAt: '2026-11-30T11:00:00Z', sampleRef: 'REF-GAS-2' })
    const res = await fetch(url(`/api/console/labs/${lab.id}/acquisitions?${q}`), { method: 'POST', headers: { cookie: admin.cookie }, body: form })
    const created = await res.json() as any
    expect(res.status, JSON.stringify(created)).toBe(201)
    expect(created).toMatchObject({ runId, instrument: 'ms-1', sampleRef: 'REF-GAS-2', acquiredAt: '2026-11-30T11:00:00.000Z' })
    expect(created.result.peaks.map((p: any) => p.assignment?.species)).toEqual(['N2', '[40Ar]', 'CO2', '[13C]O2'])
    const [audit] = await sql`select action, actor_label from audit_log where target_id = ${created.id}`
    expect(audit).toEqual({ action: 'acquisition.uploaded', actor_label: demoUser('admin').email })

    // A file the parser refuses names the column and stores nothing.
    const bad = new FormData()
    bad.append('file', new Blob(['field,detector [fA]\n0.4,1\n'], { type: 'text/csv' }), 'bad.csv')
    const refused = await fetch(url(`/api/console/labs/${lab.id}/acquisitions?${q}`), { method: 'POST', headers: { cookie: admin.cookie }, body: bad })
    expect(refused.status).toBe(422)
    expect(refused.headers.get('content-type')).toContain('application/problem+json')
    expect(((await refused.json()) as any).errors[0].path).toBe('csv.header.0')
    // So does a part that is no format at all, with a 400 rather than a server error.
    const garbage = new FormData()
    garbage.append('file', new Blob(['not json {'], { type: 'application/octet-stream' }), 'notes.txt')
    const refused2 = await fetch(url(`/api/console/labs/${lab.id}/acquisitions`), { method: 'POST', headers: { cookie: admin.cookie }, body: garbage })
    expect(refused2.status).toBe(400)
    expect(((await refused2.json()) as any).errors[0].path).toBe('file')
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(1)
  })

  it('fits a calibration from a reference acquisition for review, stores it only when saved, and later acquisitions use it', async () => {
    const { admin, lab, instrument, key, sql } = await labWithInstrument()
    const ref = await postWithKey(key.secret, referenceAcquisition())
    const base = `/api/console/labs/${lab.id}/instruments/${instrument.id}/calibrations`
    const preview = await admin.post(`${base}/preview`, { acquisitionId: ref.body.id, degree: 1 })
    expect(preview.status, JSON.stringify(preview.body)).toBe(200)
    expect(preview.body.points.map((p: any) => p.label)).toEqual(['N2', '[40Ar]', 'CO2', '[13C]O2'])
    // Singly charged ions: (neutral mass − m_e) u/e.
    const ion = (m: number) => m - ME
    const reference = preview.body.points.map((p: any) => p.referenceMz)
    const expected = [ion(2 * MASS.N14), ion(MASS.Ar40), ion(MASS.C12 + 2 * MASS.O16)]
    expected.forEach((m, i) => expect(Math.abs(reference[i] - m)).toBeLessThan(1e-6))
    // Simulated with the registered geometry, so the fit is close to identity.
    expect(preview.body.fit.rmsPpm).toBeLessThan(5)
    expect(preview.body.fit.residualsPpm).toHaveLength(4)
    const [{ n: before }] = await sql<[{ n: number }]>`select count(*)::int as n from calibrations where instrument_id = ${instrument.id}`
    expect(before).toBe(0)

    const noSuchGeometry = await admin.post(base, { degree: 1, points: preview.body.points, validFrom: '2026-11-30T12:00:00Z', geometryVersion: 9 })
    expect(noSuchGeometry.status).toBe(422)
    expect(noSuchGeometry.body.errors[0].path).toBe('geometryVersion')
    const saved = await admin.post(base, { degree: 1, points: preview.body.points, validFrom: '2026-11-30T12:00:00Z' })
    expect(saved.status).toBe(201)
    const later = await postWithKey(key.secret, { ...co2Acquisition(unique('after-cal'), 2000), acquiredAt: '2026-11-30T13:00:00Z' })
    expect(later.body.result.versions.calibration).toBe(1)
    expect(later.body.result.qc.map((q: any) => q.code)).not.toContain('uncalibrated')
    expect(later.body.result.calibration).toMatchObject({ state: 'applied', geometryVersion: 1, uncertaintyPropagated: true })
    // The calibration's own uncertainty is the peaks' m/z uncertainty now: √(gᵀCg) from the stored covariance.
    expect(later.body.result.peaks[0].centroidU).toBeGreaterThan(0)

    // A new geometry version retires the calibration fitted under the old one: not applied, flagged, marked in the console.
    await admin.post(`/api/console/labs/${lab.id}/instruments/${instrument.id}/geometry-versions`, { geometry: sectorGeometry, validFrom: '2026-11-30T14:00:00Z', note: 'realigned' })
    const retired = await postWithKey(key.secret, { ...co2Acquisition(unique('after-geo'), 2000), acquiredAt: '2026-11-30T15:00:00Z' })
    expect(retired.status).toBe(201)
    acquisitionView.parse(retired.body)
    expect(retired.body.result.versions).toMatchObject({ geometry: 2, calibration: null })
    expect(retired.body.result.calibration).toMatchObject({ state: 'retired', geometryVersion: 1 })
    expect(retired.body.result.qc.map((q: any) => q.code)).toContain('calibration-retired')
    const detail = await admin.get(`/api/console/labs/${lab.id}/instruments/${instrument.id}`)
    expect(detail.body.calibrations[0]).toMatchObject({ version: 1, geometryVersion: 1, retired: true })
  })

  it('refuses a calibration from an acquisition it cannot use, naming the field', async () => {
    const { admin, lab, instrument, key, sql } = await labWithInstrument()
    const base = `/api/console/labs/${lab.id}/instruments/${instrument.id}/calibrations/preview`
    const co2Only = await postWithKey(key.secret, co2Acquisition(unique('two-peaks'), 2000))
    // Two reference peaks cannot fix a degree-1 fit with a residual to spare.
    const tooFew = await admin.post(base, { acquisitionId: co2Only.body.id, degree: 1 })
    expect(tooFew.status).toBe(422)
    expect(tooFew.body.errors[0].path).toBe('reference.points')
    const other = await labWithInstrument()
    const foreign = await postWithKey(other.key.secret, referenceAcquisition())
    const notHers = await admin.post(base, { acquisitionId: foreign.body.id, degree: 1 })
    expect(notHers.status).toBe(422)
    expect(notHers.body.errors[0].path).toBe('acquisitionId')
    const badDegree = await admin.post(base, { acquisitionId: co2Only.body.id, degree: 4 })
    expect(badDegree.body.errors[0].path).toBe('degree')
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from calibrations where instrument_id = ${instrument.id}`
    expect(n).toBe(0)
  })

  it('lets only the lab\'s own people and admins and viewers read, and only managers and admins upload', async () => {
    const { lab, key } = await labWithInstrument()
    const posted = await postWithKey(key.secret, co2Acquisition(unique('roles'), 1500))
    const path = `/api/console/labs/${lab.id}/acquisitions/${posted.body.id}`
    expect((await (await as('viewer')).get(path)).status).toBe(200)
    expect((await (await as('integrator')).get(path)).status).toBe(403)
    // The demo lab manager manages another lab: this one does not exist for them.
    expect((await (await as('lab_manager')).get(path)).status).toBe(404)
    const viewerUpload = await (await as('viewer')).post(`/api/console/labs/${lab.id}/acquisitions`, co2Acquisition(unique('v')))
    expect(viewerUpload.status).toBe(403)
    expect((await new ConsoleClient().get(path)).status).toBe(401)
  })

  it('puts acquisitions per lab per day, the ingest rate and recent QC flags on the overview, within the reader\'s labs', async () => {
    const { admin, lab, key } = await labWithInstrument()
    const today = new Date().toISOString()
    await postWithKey(key.secret, { ...co2Acquisition(unique('today'), 1500), acquiredAt: today })
    const overview = await admin.get('/api/console/overview')
    const activity = overview.body.activity
    expect(activity.days).toHaveLength(14)
    expect(activity.days.at(-1)).toBe(today.slice(0, 10))
    const mine = activity.perLab.find((l: any) => l.labId === lab.id)
    expect(mine.counts.at(-1)).toBe(1)
    expect(activity.last24h).toBeGreaterThanOrEqual(1)
    expect(activity.recentQc.some((q: any) => q.labId === lab.id && q.flags.some((f: any) => f.code === 'uncalibrated'))).toBe(true)
    // A lab manager sees their own lab only; an integrator sees no lab figures at all.
    const managerView = (await (await as('lab_manager')).get('/api/console/overview')).body.activity
    expect(managerView.perLab.every((l: any) => l.lab === 'Saltmarsh Stable Isotope Lab')).toBe(true)
    expect(managerView.perLab.some((l: any) => l.labId === lab.id)).toBe(false)
    expect((await (await as('integrator')).get('/api/console/overview')).body.activity).toBeNull()
  })
})
