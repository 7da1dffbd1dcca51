import type { ChildProcess } from 'node:child_process'
import { Webhook } from 'standardwebhooks'
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument, sectorGeometry } from '../support/lab'
import { ConsoleClient, linkIn, startAppProcess, testDb, unique, useArcwise, waitForMail } from '../support/server'
import { recordingSink, until } from '../support/webhooks'

// Reprocessing with lineage (issue 20, point 2) against the built server and PostgreSQL.
// The server under test takes no reprocessing jobs (NUXT_REPROCESS_WORKER=false): a separate
// worker process of the same build does, so that the test can kill it with SIGKILL mid-job
// and start it again. Its batches are small and paced so that a kill lands mid-way.

const SINK_PORT = 4192
const WORKER_PORT = 3152
const webhookEnv = { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' }
await useArcwise({ env: { ...webhookEnv, NUXT_REPROCESS_WORKER: 'false' } })

const received = await recordingSink(SINK_PORT)

let worker: ChildProcess | undefined
function startWorker() {
  worker = startAppProcess(WORKER_PORT, {
    ...webhookEnv, NUXT_PROCESS_ROLE: 'worker',
    NUXT_REPROCESS_BATCH_SIZE: '2', NUXT_REPROCESS_PAUSE_MS: '150', NUXT_REPROCESS_LEASE_SECONDS: '5', NUXT_REPROCESS_POLL_MS: '200',
  })
}
async function stopWorker(signal: NodeJS.Signals) {
  const w = worker
  worker = undefined
  if (!w || w.exitCode !== null) return
  await new Promise<void>((resolve) => {
    w.once('exit', () => resolve())
    w.kill(signal)
  })
}
beforeAll(() => startWorker())
afterAll(() => stopWorker('SIGTERM'))

const sql = testDb()
const post = (secret: string, body: unknown) => new ConsoleClient().request('POST', '/api/v1/acquisitions', body, bearer(secret))

/** A lab manager of `labId`, invited by the admin and signed in. */
async function labManagerOf(admin: ConsoleClient, labId: string) {
  const email = `${unique('manager')}@example.org`
  const invited = await admin.post('/api/console/invitations', { email, role: 'lab_manager', labId })
  expect(invited.status, JSON.stringify(invited.body)).toBe(201)
  const token = linkIn((await waitForMail(email, /invited to Arcwise/)).text, '/invitations').split('/').pop()!
  const password = 'reprocessing passphrase 7'
  expect((await new ConsoleClient().post(`/api/console/invitation-links/${token}`, { name: `Manager ${unique('m')}`, password })).status).toBe(201)
  return new ConsoleClient().signIn(email, password)
}

/** A lab that holds results for review, with an instrument, `count` CO2 acquisitions of `points` points an hour apart from 2026-11-30T00:00Z, and a lab manager. */
async function labWithAcquisitions(count: number, points = 1500) {
  // Held for review: the first test releases versions 1 itself (labWithInstrument() alone releases at once).
  const ctx = await labWithInstrument({ release: 'review' })
  const manager = await labManagerOf(ctx.admin, ctx.lab.id)
  const acquired: { id: string, resultId: string }[] = []
  for (let i = 0; i < count; i++) {
    const res = await post(ctx.key.secret, { ...co2Acquisition(unique('run'), points), acquiredAt: new Date(Date.UTC(2026, 10, 30, i)).toISOString() })
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    acquired.push({ id: res.body.id, resultId: res.body.result.id })
  }
  return { ...ctx, manager, acquired, base: `/api/console/labs/${ctx.lab.id}` }
}

// A calibration that reads every m/z 30 ppm high of the uncalibrated conversion, valid from
// before the acquisitions: a back-dated calibration (reference = measured × (1 + 30e-6)).
const PPM = 30
const backDated = {
  degree: 1, validFrom: '2026-11-01T00:00:00Z',
  points: [28, 40, 44, 46].map(m => ({ measuredMz: m, referenceMz: m * (1 + PPM * 1e-6) })),
}

const jobOf = async (manager: ConsoleClient, base: string, id: string) => (await manager.get(`${base}/reprocess-jobs/${id}`)).body

describe('reprocessing after a back-dated calibration', () => {
  it('writes version 2 of each result, linked to version 1 and held; a diff shows the shift; released, each partner gets one result.corrected per released result', async () => {
    const { admin, lab, instrument, manager, acquired, base } = await labWithAcquisitions(3)
    // Versions 1 of the first two are released (as migration 0014 marks what partners had, and as
    // the review capability does); the third is still held. Written here: releasing a first
    // version is the review capability's route.
    await sql`update results set review_state = 'released', released_at = now() where id in ${sql([acquired[0]!.resultId, acquired[1]!.resultId])}`
    const paths = [`/a-${unique('p')}`, `/b-${unique('p')}`]
    const secrets: string[] = []
    for (const path of paths) {
      const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Correction Partner', kind: 'data_team', contactEmail: 'c@example.org' })).body
      expect((await admin.post(`/api/console/labs/${lab.id}/grants`, { partnerId: partner.id })).status).toBe(201)
      const endpoint = await admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${path}` })
      expect(endpoint.status, JSON.stringify(endpoint.body)).toBe(201)
      secrets.push(endpoint.body.secret)
      // Subscriptions to the lifecycle events, as migration 0014 turns result.created into them
      // (the console's event list gains them with the review capability).
      await sql`update grants set event_types = array['result.released', 'result.corrected', 'result.retracted', 'sequence.processed'] where partner_id = ${partner.id}`
      await sql`update webhook_endpoints set event_types = array['result.released', 'result.corrected', 'result.retracted', 'sequence.processed'] where partner_id = ${partner.id}`
    }
    const before = await sql<{ id: string, summary: any }[]>`select id, summary from results where id in ${sql(acquired.map(a => a.resultId))}`

    expect((await manager.post(`${base}/instruments/${instrument.id}/calibrations`, backDated)).status).toBe(201)
    const created = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, from: '2026-11-01T00:00:00Z', reason: 'Calibration of 1 November entered late' })
    expect(created.status, JSON.stringify(created.body)).toBe(201)
    expect(created.body).toMatchObject({ state: 'queued', reason: 'Calibration of 1 November entered late', progress: { total: 3, processed: 0 } })
    const done = await until('the job to finish', async () => {
      const job = await jobOf(manager, base, created.body.id)
      return job.state === 'done' && job
    })
    expect(done.progress).toEqual({ total: 3, processed: 3, changed: 3, unchanged: 0, failed: 0 })
    expect(done.items.map((i: any) => i.acquisitionId).sort()).toEqual(acquired.map(a => a.id).sort())
    expect(done.items.every((i: any) => i.oldVersion === 1 && i.newVersion === 2 && i.reviewState === 'held')).toBe(true)

    for (const a of acquired) {
      const rows = await sql<any[]>`select id, version, supersedes, superseded_by, review_state, correction_reason, reprocess_job_id, summary from results where acquisition_id = ${a.id} order by version`
      expect(rows.map(r => r.version)).toEqual([1, 2])
      const [v1, v2] = rows
      expect(v1.id).toBe(a.resultId)
      expect(v1.superseded_by).toBe(v2.id)
      expect(v2).toMatchObject({ supersedes: v1.id, superseded_by: null, review_state: 'held', correction_reason: 'Calibration of 1 November entered late', reprocess_job_id: created.body.id })
      // Never overwritten: version 1 is byte for byte what it was.
      expect(v1.summary).toEqual(before.find(b => b.id === v1.id)!.summary)
      expect(v2.summary.calibrationVersion).toBe(1)
      const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from peaks where result_id = ${v2.id}`
      expect(n).toBe(v2.summary.peaks.length)

      const diff = await manager.get(`${base}/acquisitions/${a.id}/diff`)
      expect(diff.status, JSON.stringify(diff.body)).toBe(200)
      expect(diff.body).toMatchObject({ from: { version: 1, versions: { calibration: null } }, to: { version: 2, versions: { calibration: 1 } }, changed: true, calibrated: { old: false, new: true } })
      expect(diff.body.flags.removed).toContain('uncalibrated')
      const paired = diff.body.peaks.filter((p: any) => p.old && p.new)
      expect(paired.length).toBeGreaterThanOrEqual(2)
      // The calibration moves every m/z by +30 ppm (a linear fit through points on one line).
      for (const p of paired) expect(p.mzShiftPpm).toBeCloseTo(PPM, 1)
      expect(diff.body.ratios[0]).toMatchObject({ id: 'VPDB:13C/12C' })
      expect(diff.body.ratios[0].old.deltaPermil).toEqual(expect.any(Number))
      const versions = await manager.get(`${base}/acquisitions/${a.id}/versions`)
      expect(versions.body.items.map((v: any) => [v.version, v.reviewState, v.published])).toEqual(
        [[1, a === acquired[2] ? 'held' : 'released', a !== acquired[2]], [2, 'held', false]])
    }
    // Held versions reach nobody.
    const [{ n: none }] = await sql<[{ n: number }]>`select count(*)::int as n from events where lab_id = ${lab.id} and type in ('result.corrected', 'result.released')`
    expect(none).toBe(0)

    const v2Of = async (a: { id: string }) => (await sql<[{ id: string }]>`select id from results where acquisition_id = ${a.id} and version = 2`)[0].id
    for (const a of acquired) {
      const released = await manager.post(`${base}/results/${await v2Of(a)}/release-correction`, { comment: 'checked against the reference gas' })
      expect(released.status, JSON.stringify(released.body)).toBe(200)
      expect(released.body.event).toBe(a === acquired[2] ? 'result.released' : 'result.corrected')
    }
    // Twice is refused; so is a first version.
    expect((await manager.post(`${base}/results/${await v2Of(acquired[0]!)}/release-correction`, {})).status).toBe(409)
    expect((await manager.post(`${base}/results/${acquired[0]!.resultId}/release-correction`, {})).body.type).toBe('urn:arcwise:problem:not-a-correction')

    const corrected = (path: string) => received.filter(r => r.path === path && r.body.includes('"result.corrected"'))
    await until('two corrections at each partner', () => paths.every(p => corrected(p).length >= 2))
    await until('the first release at each partner', () => paths.every(p => received.some(r => r.path === p && r.body.includes('"result.released"'))))
    await new Promise(r => setTimeout(r, 1000))
    paths.forEach((path, i) => {
      const messages = corrected(path).map(m => new Webhook(secrets[i]!).verify(m.body, m.headers) as { type: string, data: any })
      expect(messages).toHaveLength(2)
      expect(messages.map(m => m.data.correction.previousResultId).sort()).toEqual([acquired[0]!.resultId, acquired[1]!.resultId].sort())
      for (const m of messages) {
        expect(m.data.correction).toMatchObject({ previousVersion: 1, reason: 'Calibration of 1 November entered late' })
        expect(m.data.result.review).toMatchObject({ state: 'released', version: 2, supersedes: m.data.correction.previousResultId, correctionReason: 'Calibration of 1 November entered late' })
        expect(m.data.result.versions.calibration).toBe(1)
      }
      // The held version 1 was never published: its version 2 is a first release, not a correction.
      expect(received.filter(r => r.path === path && r.body.includes('"result.released"'))).toHaveLength(1)
    })

    const audit = await sql<{ action: string }[]>`select action from audit_log where target_id in ${sql([created.body.id, ...await Promise.all(acquired.map(v2Of))])}`
    expect(audit.map(a => a.action).sort()).toEqual(['reprocess.job-created', 'reprocess.job-finished', 'result.corrected', 'result.corrected', 'result.released'].sort())
  })
})

describe('a reprocessing job killed mid-way', () => {
  it('finishes after SIGKILL and a restart with every acquisition reprocessed exactly once; meanwhile a second job for the instrument is 409, and a queued job can be cancelled', async () => {
    const { instrument, manager, acquired, base, admin, key } = await labWithAcquisitions(24, 1000)
    expect((await manager.post(`${base}/instruments/${instrument.id}/calibrations`, backDated)).status).toBe(201)
    const created = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'Back-dated calibration' })
    expect(created.status, JSON.stringify(created.body)).toBe(201)
    const jobId = created.body.id
    const progress = async () => (await sql<[{ processed: number, total: number, state: string }]>`select processed, total, state from reprocess_jobs where id = ${jobId}`)[0]
    await until('a few batches', async () => (await progress()).processed >= 6, 60_000)
    await stopWorker('SIGKILL')
    const atKill = await progress()
    expect(atKill.state).toBe('running')
    expect(atKill.processed).toBeGreaterThan(0)
    expect(atKill.processed).toBeLessThan(24)
    // Nothing half-written: every item marked done has its version 2, and no other has one.
    const [{ done, written }] = await sql<[{ done: number, written: number }]>`
      select (select count(*) from reprocess_items where job_id = ${jobId} and state = 'done')::int as done,
             (select count(*) from results where reprocess_job_id = ${jobId})::int as written`
    expect(written).toBe(done)
    expect(done).toBe(atKill.processed)

    // While its worker is dead the job still holds the instrument.
    const second = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'again' })
    expect(second.status).toBe(409)
    expect(second.body).toMatchObject({ type: 'urn:arcwise:problem:reprocess-job-active', errors: [{ path: 'instrumentId' }] })
    // A queued job on another instrument is cancelled before any worker takes it.
    const other = (await admin.post(`${base}/instruments`, { slug: 'ms-2', name: 'Sector two', geometry: sectorGeometry, validFrom: '2026-01-01T00:00:00Z' })).body
    expect((await post(key.secret, { ...co2Acquisition(unique('run'), 1000), instrument: 'ms-2' })).status).toBe(201)
    const queued = await manager.post(`${base}/reprocess-jobs`, { instrumentId: other.id, reason: 'to be cancelled' })
    expect(queued.status).toBe(201)
    const cancelled = await manager.post(`${base}/reprocess-jobs/${queued.body.id}/cancel`, {})
    expect(cancelled.status).toBe(200)
    expect(cancelled.body.state).toBe('cancelled')
    expect((await manager.post(`${base}/reprocess-jobs/${queued.body.id}/cancel`, {})).status).toBe(409)

    startWorker()
    await until('the job to finish after the restart', async () => (await progress()).state === 'done', 60_000)
    expect(await progress()).toMatchObject({ processed: 24, total: 24, state: 'done' })
    const perAcquisition = await sql<{ acquisition_id: string, versions: number, from_job: number }[]>`
      select acquisition_id, count(*)::int as versions, count(*) filter (where reprocess_job_id = ${jobId})::int as from_job
      from results where acquisition_id in ${sql(acquired.map(a => a.id))} group by acquisition_id`
    expect(perAcquisition).toHaveLength(24)
    expect(perAcquisition.every(r => r.versions === 2 && r.from_job === 1)).toBe(true)
    const [{ pending, peaksWritten, peaksExpected }] = await sql<[{ pending: number, peaksWritten: number, peaksExpected: number }]>`
      select (select count(*) from reprocess_items where job_id = ${jobId} and state <> 'done')::int as pending,
             (select count(*) from peaks p join results r on r.id = p.result_id where r.reprocess_job_id = ${jobId})::int as "peaksWritten",
             (select sum(jsonb_array_length(summary->'peaks')) from results where reprocess_job_id = ${jobId})::int as "peaksExpected"`
    expect(pending).toBe(0)
    expect(peaksWritten).toBe(peaksExpected)
    // The cancelled job stayed cancelled, its acquisition untouched.
    expect((await sql`select state from reprocess_jobs where id = ${queued.body.id}`)[0]!.state).toBe('cancelled')
    expect((await sql`select count(*)::int as n from results where reprocess_job_id = ${queued.body.id}`)[0]!.n).toBe(0)
    const listed = await manager.get(`${base}/reprocess-jobs`)
    expect(listed.body.items.map((j: any) => [j.id, j.state])).toEqual(expect.arrayContaining([[jobId, 'done'], [queued.body.id, 'cancelled']]))
  })

  it('reprocesses nothing twice: a job over unchanged registrations finds every result unchanged and writes no version', async () => {
    const { instrument, manager, acquired, base } = await labWithAcquisitions(2, 1000)
    const created = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'engine upgrade check' })
    expect(created.status).toBe(201)
    const done = await until('the job to finish', async () => {
      const job = await jobOf(manager, base, created.body.id)
      return job.state === 'done' && job
    })
    expect(done.progress).toEqual({ total: 2, processed: 2, changed: 0, unchanged: 2, failed: 0 })
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from results where acquisition_id in ${sql(acquired.map(a => a.id))}`
    expect(n).toBe(2)
  })
})

describe('a database fault while reprocessing', () => {
  it('fails no item: the batch rolls back, the items stay pending, and the job finishes once the database answers again', async () => {
    const { instrument, manager, acquired, base } = await labWithAcquisitions(2, 1000)
    expect((await manager.post(`${base}/instruments/${instrument.id}/calibrations`, backDated)).status).toBe(201)
    const state = async (id: string) => (await sql<[{ processed: number, failed: number, state: string, pending: number }]>`
      select processed, failed, state, (select count(*) from reprocess_items where job_id = ${id} and state = 'pending')::int as pending
      from reprocess_jobs where id = ${id}`)[0]
    let jobId = ''
    // The worker reads the calibration in force for each acquisition: with its table gone, that read fails.
    await sql`alter table calibrations rename to calibrations_offline`
    try {
      const created = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'Database fault drill' })
      expect(created.status, JSON.stringify(created.body)).toBe(201)
      jobId = created.body.id
      await until('the worker to take the job', async () => (await state(jobId)).state !== 'queued', 30_000)
      await new Promise(r => setTimeout(r, 2000))
      expect(await state(jobId)).toMatchObject({ state: 'running', processed: 0, failed: 0, pending: 2 })
    }
    finally {
      await sql`alter table calibrations_offline rename to calibrations`
    }
    // Taken again once the lease runs out: every acquisition reprocessed, none failed.
    await until('the job to finish', async () => (await state(jobId)).state === 'done', 60_000)
    expect(await state(jobId)).toMatchObject({ processed: 2, failed: 0, pending: 0 })
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from results where reprocess_job_id = ${jobId} and acquisition_id in ${sql(acquired.map(a => a.id))}`
    expect(n).toBe(2)
  })
})

describe('refusals', () => {
  it('names the field of each bad selection and stores nothing; other roles and labs are refused', async () => {
    const { instrument, manager, base, lab, admin } = await labWithAcquisitions(1, 1000)
    const cases: [Record<string, unknown>, string][] = [
      [{ instrumentId: instrument.id }, 'reason'],
      [{ instrumentId: instrument.id, reason: '  ' }, 'reason'],
      [{ instrumentId: 'ms-1', reason: 'why' }, 'instrumentId'],
      [{ instrumentId: '2b0f6a3c-1d5e-4f7a-8b9c-0d1e2f3a4b5c', reason: 'why' }, 'instrumentId'],
      [{ instrumentId: instrument.id, reason: 'why', from: 'last tuesday' }, 'from'],
      [{ instrumentId: instrument.id, reason: 'why', from: '2026-12-01T00:00:00Z', to: '2026-11-01T00:00:00Z' }, 'to'],
      [{ instrumentId: instrument.id, reason: 'why', sequenceId: '2b0f6a3c-1d5e-4f7a-8b9c-0d1e2f3a4b5c' }, 'sequenceId'],
      [{ instrumentId: instrument.id, reason: 'why', methodVersion: 0 }, 'methodVersion'],
      [{ instrumentId: instrument.id, reason: 'why', methodVersion: 7 }, 'methodVersion'],
      [{ instrumentId: instrument.id, reason: 'why', from: '2020-01-01T00:00:00Z', to: '2020-02-01T00:00:00Z' }, 'from'],
      [{ instrumentId: instrument.id, reason: 'why', everything: true }, 'everything'],
    ]
    for (const [body, path] of cases) {
      const res = await manager.post(`${base}/reprocess-jobs`, body)
      expect(res.status, JSON.stringify(body)).toBe(422)
      expect(res.headers.get('content-type')).toContain('application/problem+json')
      expect(res.body.errors.map((e: any) => e.path), JSON.stringify(body)).toContain(path)
    }
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from reprocess_jobs where lab_id = ${lab.id}`
    expect(n).toBe(0)
    const viewer = await new ConsoleClient().signIn(demoUser('viewer').email, demoUser('viewer').password)
    expect((await viewer.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'why' })).status).toBe(403)
    expect((await viewer.get(`${base}/reprocess-jobs`)).status).toBe(200)
    const otherManager = await new ConsoleClient().signIn(demoUser('lab_manager').email, demoUser('lab_manager').password)
    expect((await otherManager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'why' })).status).toBe(404)
    expect((await otherManager.get(`${base}/reprocess-jobs`)).status).toBe(404)
    expect((await admin.get(`${base}/reprocess-jobs/2b0f6a3c-1d5e-4f7a-8b9c-0d1e2f3a4b5c`)).status).toBe(404)
  })

  it('under the four-eyes rule, whoever started the job may not release its corrections', async () => {
    const { admin, instrument, manager, acquired, base, lab } = await labWithAcquisitions(1, 1000)
    await sql`update labs set four_eyes = true where id = ${lab.id}`
    expect((await manager.post(`${base}/instruments/${instrument.id}/calibrations`, backDated)).status).toBe(201)
    const created = await manager.post(`${base}/reprocess-jobs`, { instrumentId: instrument.id, reason: 'four eyes' })
    await until('the job to finish', async () => (await jobOf(manager, base, created.body.id)).state === 'done')
    const [{ id }] = await sql<[{ id: string }]>`select id from results where acquisition_id = ${acquired[0]!.id} and version = 2`
    const refused = await manager.post(`${base}/results/${id}/release-correction`, {})
    expect(refused.status).toBe(403)
    expect(refused.body.type).toBe('urn:arcwise:problem:four-eyes')
    const colleague = await labManagerOf(admin, lab.id)
    expect((await colleague.post(`${base}/results/${id}/release-correction`, {})).status).toBe(200)
  })
})
