import { url } from '@nuxt/test-utils/e2e'
import { Webhook } from 'standardwebhooks'
import { beforeAll, describe, expect, it } from 'vitest'
import { hashPassword } from '../../scripts/lib/password'
import { everyQcCode } from '../../scripts/lib/demo'
import { exchangeSchemaSources } from '../../shared/schemas/exchange'
import { acquisitionView, eventFeedView, peakListView, resultRetractedData } from '../../shared/schemas/responses'
import { sequenceEventData, sequenceView } from '../../shared/schemas/sequences'
import type { Role } from '../../shared/types/roles'
import { buildSequence, caseMethod, cases } from '../support/deltaSequences'
import { bearer, co2Acquisition, labWithInstrument, setRelease } from '../support/lab'
import { lab as labApi, membersOf, registerMethod } from '../support/sequences'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'
import { recordingSink, until } from '../support/webhooks'

// Review before release (issue 20): results are held until a reviewer of the lab releases
// them, and no partner sees a held or rejected result by any route (webhook, event feed,
// result read, peaks, exports). Releases, corrections and retractions reach partners as
// events; every decision is audited.

const SINK_PORT = 4193
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

const received = await recordingSink(SINK_PORT)

const PASSWORD = 'review-test-passphrase'
let passwordHash = ''
beforeAll(async () => { passwordHash = await hashPassword(PASSWORD) })

/** A console user of `role` (scoped to `labId` for lab roles), signed in. */
async function person(role: Role, labId: string | null, name = unique('Person')) {
  const email = `${unique(role)}@example.org`
  await testDb()`insert into users (email, name, password_hash, role, lab_id) values (${email}, ${name}, ${passwordHash}, ${role}, ${labId})`
  return new ConsoleClient().signIn(email, PASSWORD)
}

async function partnerToken(clientId: string, clientSecret: string) {
  const res = await fetch(url('/api/v1/oauth/token'), {
    method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' },
    body: new URLSearchParams({ grant_type: 'client_credentials', client_id: clientId, client_secret: clientSecret }),
  })
  return (await res.json() as { access_token: string }).access_token
}

/**
 * A lab that holds results for review, granting a new partner that has an endpoint at the
 * sink (on result-event v2, so it takes sequence.processed too) and an API client; its
 * lab manager and two reviewers.
 */
async function reviewedLab() {
  const ctx = await labWithInstrument({ release: 'review' })
  const partner = (await ctx.admin.post('/api/console/partners', { slug: unique('p'), name: 'Review Partner', kind: 'regulator', contactEmail: 'r@example.org' })).body
  await ctx.admin.post(`/api/console/labs/${ctx.lab.id}/grants`, { partnerId: partner.id })
  const path = `/review-${unique('x')}`
  const endpoint = (await ctx.admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${path}`, schemaVersion: 2 })).body
  const client = (await ctx.admin.post(`/api/console/partners/${partner.id}/clients`, { name: 'pipeline' })).body
  const token = await partnerToken(client.clientId, client.clientSecret)
  const asPartner = (p: string) => new ConsoleClient().request('GET', p, undefined, bearer(token))
  const [manager, reviewer, reviewer2] = await Promise.all([
    person('lab_manager', ctx.lab.id), person('lab_reviewer', ctx.lab.id, 'Rhea Okafor'), person('lab_reviewer', ctx.lab.id, 'Sol Brennan'),
  ])
  const post = async (runId = unique('run')) => {
    const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(runId, 1500), bearer(ctx.key.secret))
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    return res.body
  }
  const messages = () => received.filter(r => r.path === path).map(r => ({ ...r, parsed: new Webhook(endpoint.secret).verify(r.body, r.headers) as { type: string, data: any } }))
  const base = `/api/console/labs/${ctx.lab.id}`
  return { ...ctx, partner, endpoint, path, asPartner, manager, reviewer, reviewer2, post, messages, base }
}
type Reviewed = Awaited<ReturnType<typeof reviewedLab>>

/** A webhook's `data` without the event's own fields (eventId, lab, sequence), to check against the result's schema. */
function withoutEventHead(data: Record<string, unknown>) {
  return Object.fromEntries(Object.entries(data).filter(([k]) => !['eventId', 'lab', 'sequence'].includes(k)))
}

/** What a partner can find of acquisition `id` by every partner route. */
async function partnerSees(ctx: Reviewed, id: string, mz = { min: 43.9, max: 44.1 }) {
  const read = await ctx.asPartner(`/api/v1/results/${id}`)
  const feed = await ctx.asPartner('/api/v1/events?limit=200')
  const peaks = await ctx.asPartner(`/api/v1/peaks?mzMin=${mz.min}&mzMax=${mz.max}&limit=500`)
  const csv = await ctx.asPartner(`/api/v1/acquisitions/${id}/spectrum.csv`)
  const jdx = await ctx.asPartner(`/api/v1/acquisitions/${id}/spectrum.jdx`)
  expect(feed.status).toBe(200)
  expect(peaks.status).toBe(200)
  eventFeedView.parse(feed.body)
  peakListView.parse(peaks.body)
  return {
    read,
    feed: (feed.body.items as { type: string, data: any }[]).filter(e => e.data.id === id),
    peaks: (peaks.body.items as { acquisitionId: string, review: any }[]).filter(p => p.acquisitionId === id),
    exports: [csv.status, jdx.status],
    webhooks: ctx.messages().filter(m => m.parsed.data.id === id),
  }
}

describe('held results reach no partner by any route', () => {
  it('a held result is the lab\'s alone; released, result.released is delivered and every partner route shows it with its review block', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    acquisitionView.parse(acq)
    expect(acq.result.review).toMatchObject({ state: 'held', releasedAt: null, reviewedBy: null, version: 1, supersedes: null })
    expect(acq.result.caution).toMatch(/quality system/)
    expect(acq.result.versions).toMatchObject({ engine: expect.any(String), geometry: 1, calibration: null, method: null })
    // The lab's own system reads it, marked held.
    const own = await new ConsoleClient().request('GET', `/api/v1/acquisitions/${acq.id}/result`, undefined, bearer(ctx.key.secret))
    expect(own.body.review.state).toBe('held')

    // Give the delivery worker time to send anything it (wrongly) owed.
    await new Promise(r => setTimeout(r, 1500))
    const before = await partnerSees(ctx, acq.id)
    expect(before.read.status).toBe(404)
    expect(before.feed).toEqual([])
    expect(before.peaks).toEqual([])
    // Exports are the lab's (lab key only): a partner token is not a lab key.
    expect(before.exports).toEqual([401, 401])
    expect(before.webhooks).toEqual([])
    expect((await ctx.sql`select count(*)::int as n from events where lab_id = ${ctx.lab.id}`)[0]!.n).toBe(0)

    const queue = await ctx.reviewer.get(`${ctx.base}/review`)
    expect(queue.status).toBe(200)
    expect(queue.body.results.items.map((r: any) => r.resultId)).toEqual([acq.result.id])
    expect(queue.body.results.items[0].qc).toContain('uncalibrated')

    const released = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, { comment: 'Peaks and ratios checked against the bench log.' })
    expect(released.status, JSON.stringify(released.body)).toBe(200)
    expect(released.body).toMatchObject({ event: 'result.released', review: { state: 'released', reviewedBy: 'Rhea Okafor' } })

    const message = await until('the result.released message', () => ctx.messages().find(m => m.parsed.data.id === acq.id))
    expect(message.parsed.type).toBe('result.released')
    acquisitionView.parse(withoutEventHead(message.parsed.data))
    expect(message.parsed.data.result.review).toMatchObject({ state: 'released', reviewedBy: 'Rhea Okafor', version: 1 })
    expect(message.parsed.data.result.review.releasedAt).toEqual(expect.any(String))
    expect(message.parsed.data.result).toMatchObject({ calibrated: false, caution: expect.stringMatching(/quality system/), versions: { geometry: 1 } })

    const after = await partnerSees(ctx, acq.id)
    expect(after.read.status).toBe(200)
    acquisitionView.parse(after.read.body)
    expect(after.read.body.result.review).toMatchObject({ state: 'released', reviewedBy: 'Rhea Okafor' })
    expect(after.feed.map(e => e.type)).toEqual(['result.released'])
    expect(after.peaks.length).toBeGreaterThan(0)
    for (const p of after.peaks as any[]) {
      expect(p.review.state).toBe('released')
      expect(p).toMatchObject({ calibrated: false, caution: expect.any(String), versions: { geometry: 1 } })
      expect(p.mzU).toBeGreaterThan(0)
      expect(p.areaU).toBeGreaterThan(0)
    }
    expect((await ctx.reviewer.get(`${ctx.base}/review`)).body.results.items).toEqual([])
    const [audit] = await ctx.sql`select actor_label, detail from audit_log where action = 'result.released' and target_id = ${acq.result.id}`
    expect(audit!.detail).toMatchObject({ comment: 'Peaks and ratios checked against the bench log.', version: 1, automatic: false })
    // Released twice: refused, and nothing more is sent.
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(409)
  })

  it('a rejection needs a comment; a rejected result never reaches partners and stays in the console', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    const bare = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/reject`, {})
    expect(bare.status).toBe(422)
    expect(bare.body.errors[0].path).toBe('comment')
    const rejected = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/reject`, { comment: 'Source pressure out of range during the run.' })
    expect(rejected.status).toBe(200)
    expect(rejected.body.review.state).toBe('rejected')
    const seen = await partnerSees(ctx, acq.id)
    expect(seen.read.status).toBe(404)
    expect(seen.feed).toEqual([])
    expect(seen.peaks).toEqual([])
    const detail = await ctx.reviewer.get(`${ctx.base}/acquisitions/${acq.id}`)
    expect(detail.body).toMatchObject({ reviewComment: 'Source pressure out of range during the run.', result: { review: { state: 'rejected' } } })
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(409)
    expect((await ctx.sql`select count(*)::int as n from audit_log where action = 'result.rejected' and target_id = ${acq.result.id}`)[0]!.n).toBe(1)
  })
})

describe('retraction', () => {
  it('needs a reason; partners receive result.retracted and the read shows the result marked, with the reason', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/retract`, { reason: 'too early' })).status).toBe(409)
    await ctx.manager.post(`${ctx.base}/results/${acq.result.id}/release`, {})
    const noReason = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/retract`, { reason: '  ' })
    expect(noReason.status).toBe(422)
    expect(noReason.body.errors[0].path).toBe('reason')
    const reason = 'Sample label mix-up found at the weekly audit.'
    const retracted = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/retract`, { reason })
    expect(retracted.status).toBe(200)

    const message = await until('the result.retracted message', () => ctx.messages().find(m => m.parsed.type === 'result.retracted'))
    const data = resultRetractedData.parse(withoutEventHead(message.parsed.data))
    expect(data).toMatchObject({ resultId: acq.result.id, id: acq.id, runId: acq.runId, version: 1, reason, review: { state: 'retracted', retractionReason: reason } })
    // Order: the release went out first.
    expect(ctx.messages().map(m => m.parsed.type)).toEqual(['result.released', 'result.retracted'])

    const seen = await partnerSees(ctx, acq.id)
    expect(seen.read.status).toBe(200)
    expect(seen.read.body.result.review).toMatchObject({ state: 'retracted', retractionReason: reason, retractedAt: expect.any(String) })
    expect(seen.feed.map(e => e.type)).toEqual(['result.released', 'result.retracted'])
    for (const p of seen.peaks) expect(p.review.state).toBe('retracted')
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/retract`, { reason })).status).toBe(409)
    const [audit] = await ctx.sql`select detail from audit_log where action = 'result.retracted' and target_id = ${acq.result.id}`
    expect(audit!.detail).toMatchObject({ reason })
  })
})

describe('corrections', () => {
  it('a later version released over a released one goes out as result.corrected, naming the previous result and the reason; partners then read the new version', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(200)
    // Version 2 as reprocessing writes it: held, superseding version 1, with its reason.
    const reason = 'Calibration of 2026-11-28 re-fitted with the corrected reference gas.'
    const [v2] = await ctx.sql<{ id: string }[]>`
      insert into results (acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, version, supersedes, correction_reason)
      select acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, 2, id, ${reason} from results where id = ${acq.result.id} returning id`
    await ctx.sql`update results set superseded_by = ${v2!.id} where id = ${acq.result.id}`
    // Held, it changes nothing for partners.
    expect((await ctx.asPartner(`/api/v1/results/${acq.id}`)).body.result.review).toMatchObject({ version: 1, state: 'released' })
    expect((await ctx.reviewer.get(`${ctx.base}/acquisitions/${acq.id}`)).body.result.review).toMatchObject({ version: 2, state: 'held', supersedes: acq.result.id, correctionReason: reason })

    const released = await ctx.reviewer.post(`${ctx.base}/results/${v2!.id}/release`, { comment: 'Checked the new calibration.' })
    expect(released.status).toBe(200)
    expect(released.body.event).toBe('result.corrected')
    const message = await until('the result.corrected message', () => ctx.messages().find(m => m.parsed.type === 'result.corrected'))
    expect(message.parsed.data.correction).toEqual({ previousResultId: acq.result.id, previousVersion: 1, reason })
    expect(message.parsed.data.result).toMatchObject({ id: v2!.id, review: { state: 'released', version: 2, supersedes: acq.result.id, correctionReason: reason } })
    const read = await ctx.asPartner(`/api/v1/results/${acq.id}`)
    expect(read.body.result).toMatchObject({ id: v2!.id, review: { version: 2 } })
    expect((await partnerSees(ctx, acq.id)).feed.map(e => e.type)).toEqual(['result.released', 'result.corrected'])
    const [audit] = await ctx.sql`select detail from audit_log where action = 'result.corrected' and target_id = ${v2!.id}`
    expect(audit!.detail).toMatchObject({ previousResultId: acq.result.id, previousVersion: 1, reason, version: 2 })
    // The older version cannot be released over the newer one.
    await ctx.sql`update results set review_state = 'held' where id = ${acq.result.id}`
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(409)
  })
})

/** A newer version of a result as reprocessing writes it: held, superseding `of`, with a reason. */
async function newVersion(ctx: Reviewed, of: { id: string, version: number }, reason = 'Calibration re-fitted with the corrected reference gas.') {
  const [row] = await ctx.sql<{ id: string }[]>`
    insert into results (acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, version, supersedes, correction_reason)
    select acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, ${of.version + 1}, id, ${reason} from results where id = ${of.id} returning id`
  await ctx.sql`update results set superseded_by = ${row!.id} where id = ${of.id}`
  return { id: row!.id, version: of.version + 1 }
}

describe('versions of one acquisition', () => {
  it('a held version that a newer one replaces cannot be released and leaves the review queue, until the newer one is rejected', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    const v2 = await newVersion(ctx, { id: acq.result.id, version: 1 })
    const queue = (await ctx.reviewer.get(`${ctx.base}/review`)).body.results
    expect(queue.items.map((r: any) => r.resultId)).toEqual([v2.id])
    expect(queue.total).toBe(1)
    const refused = await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})
    expect(refused.status).toBe(409)
    expect(refused.body.type).toBe('urn:arcwise:problem:superseded')
    expect((await ctx.sql`select review_state from results where id = ${acq.result.id}`)[0]!.review_state).toBe('held')
    expect((await ctx.sql`select count(*)::int as n from events where lab_id = ${ctx.lab.id}`)[0]!.n).toBe(0)
    // The newer version rejected, the older one is the one to review again.
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v2.id}/reject`, { comment: 'Wrong reference gas chosen.' })).status).toBe(200)
    expect((await ctx.reviewer.get(`${ctx.base}/review`)).body.results.items.map((r: any) => r.resultId)).toEqual([acq.result.id])
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(200)
  })

  it('two versions released at the same moment: one result.released, never two, and partners read the newer', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    const v2 = await newVersion(ctx, { id: acq.result.id, version: 1 })
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v2.id}/reject`, { comment: 'Re-run the fit.' })).status).toBe(200)
    const v3 = await newVersion(ctx, v2)
    // Versions 1 and 3 are both held and releasable. The lab's row (its event counter) is held
    // here, so that both releases are in flight at once before either commits.
    let releases: Promise<{ status: number, body: any }>[] = []
    await ctx.sql.begin(async (tx) => {
      await tx`select 1 from labs where id = ${ctx.lab.id} for update`
      releases = [ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {}), ctx.reviewer2.post(`${ctx.base}/results/${v3.id}/release`, {})]
      await new Promise(r => setTimeout(r, 1500))
    })
    const answers = await Promise.all(releases)
    expect(answers.map(a => a.status)).toContain(200)
    const events = await ctx.sql<{ type: string }[]>`select type from events where lab_id = ${ctx.lab.id} order by sequence`
    expect(events.filter(e => e.type === 'result.released')).toHaveLength(1)
    expect((await ctx.asPartner(`/api/v1/results/${acq.id}`)).body.result.review).toMatchObject({ version: 3, state: 'released' })
  })

  it('partners are told a correction supersedes the version they were shown, not a rejected one in between', async () => {
    const ctx = await reviewedLab()
    const acq = await ctx.post()
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(200)
    const v2 = await newVersion(ctx, { id: acq.result.id, version: 1 })
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v2.id}/reject`, { comment: 'Wrong reference gas chosen.' })).status).toBe(200)
    const v3 = await newVersion(ctx, v2, 'Calibration re-fitted a second time.')
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v3.id}/release`, {})).body.event).toBe('result.corrected')
    const message = await until('the result.corrected message', () => ctx.messages().find(m => m.parsed.type === 'result.corrected'))
    expect(message.parsed.data.correction).toMatchObject({ previousResultId: acq.result.id, previousVersion: 1 })
    expect(message.parsed.data.result.review).toMatchObject({ version: 3, supersedes: acq.result.id })
    const seen = await partnerSees(ctx, acq.id)
    expect(seen.read.body.result.review).toMatchObject({ version: 3, supersedes: acq.result.id })
    expect(seen.feed.find(e => e.type === 'result.corrected')!.data.result.review.supersedes).toBe(acq.result.id)
    // The lab's own view keeps the lineage as it is.
    expect((await ctx.reviewer.get(`${ctx.base}/acquisitions/${acq.id}`)).body.result.review.supersedes).toBe(v2.id)
  })
})

describe('lifecycle events and the exchange schemas', () => {
  it('result.corrected and result.retracted are described by result-event v2 and go only to endpoints on v2; a v1 endpoint keeps result.released', async () => {
    const ctx = await reviewedLab()
    const v1Path = `/review-v1-${unique('x')}`
    const v1Endpoint = await ctx.admin.post(`/api/console/partners/${ctx.partner.id}/endpoints`, { url: `http://127.0.0.1:${SINK_PORT}${v1Path}`, schemaVersion: 1 })
    expect(v1Endpoint.status, JSON.stringify(v1Endpoint.body)).toBe(201)
    const acq = await ctx.post()
    expect((await ctx.reviewer.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(200)
    const v2 = await newVersion(ctx, { id: acq.result.id, version: 1 })
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v2.id}/release`, {})).body.event).toBe('result.corrected')
    expect((await ctx.reviewer.post(`${ctx.base}/results/${v2.id}/retract`, { reason: 'Reference gas contaminated.' })).status).toBe(200)
    await until('the retraction at the v2 endpoint', () => ctx.messages().some(m => m.parsed.type === 'result.retracted'))
    const resultEventV2 = exchangeSchemaSources['result-event'][2]
    for (const m of ctx.messages()) expect(() => resultEventV2.parse(withoutEventHead(m.parsed.data)), m.parsed.type).not.toThrow()
    expect(ctx.messages().map(m => m.parsed.type)).toEqual(['result.released', 'result.corrected', 'result.retracted'])
    // The published v2 document names both shapes.
    const published = JSON.stringify((await new ConsoleClient().get('/api/v1/schemas/result-event/2')).body)
    expect(published).toContain('"correction"')
    expect(published).toContain('"retraction"')
    await new Promise(r => setTimeout(r, 1500))
    const atV1 = received.filter(r => r.path === v1Path).map(r => new Webhook(v1Endpoint.body.secret).verify(r.body, r.headers) as { type: string, data: any })
    expect(atV1.map(m => m.type)).toEqual(['result.released'])
    expect(() => exchangeSchemaSources['result-event'][1].parse(withoutEventHead(atV1[0]!.data))).not.toThrow()
  })
})

describe('four eyes and automatic release', () => {
  it('under four eyes, whoever uploaded a result cannot release it; another reviewer can', async () => {
    const ctx = await reviewedLab()
    await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'review', fourEyes: true })
    const upload = await ctx.manager.post(`${ctx.base}/acquisitions`, co2Acquisition(unique('console'), 1500))
    expect(upload.status).toBe(201)
    expect((await ctx.sql`select submitted_by from acquisitions where id = ${upload.body.id}`)[0]!.submitted_by).toEqual(expect.any(String))
    const own = await ctx.manager.post(`${ctx.base}/results/${upload.body.result.id}/release`, {})
    expect(own.status).toBe(403)
    expect(own.body.type).toBe('urn:arcwise:problem:four-eyes')
    expect((await ctx.reviewer.post(`${ctx.base}/results/${upload.body.result.id}/release`, {})).status).toBe(200)
    // Without the rule, the uploader may release their own.
    await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'review', fourEyes: false })
    const second = await ctx.manager.post(`${ctx.base}/acquisitions`, co2Acquisition(unique('console'), 1500))
    expect((await ctx.manager.post(`${ctx.base}/results/${second.body.result.id}/release`, {})).status).toBe(200)
  })

  it('the automatic rule releases at once only results whose every QC flag the lab allows, and the change is audited', async () => {
    const ctx = await reviewedLab()
    const flags = (await ctx.post()).result.qc.map((f: { code: string }) => f.code) as string[]
    expect(flags).toContain('uncalibrated')
    const settings = await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'auto', autoReleaseAllows: flags.filter(c => c !== 'uncalibrated') })
    expect(settings.releasePolicy).toBe('auto')
    const held = await ctx.post()
    expect(held.result.review.state).toBe('held')
    await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'auto', autoReleaseAllows: everyQcCode })
    const auto = await ctx.post()
    expect(auto.result.review).toMatchObject({ state: 'released', reviewedBy: null, releasedAt: auto.receivedAt })
    const message = await until('the automatic result.released', () => ctx.messages().find(m => m.parsed.data.id === auto.id))
    expect(message.parsed.data.result.review).toMatchObject({ state: 'released', reviewedBy: null })
    expect(ctx.messages().some(m => m.parsed.data.id === held.id)).toBe(false)
    const changes = await ctx.sql`select detail from audit_log where action = 'lab.release-policy-changed' and target_id = ${ctx.lab.id} order by at`
    expect(changes.length).toBe(2)
    expect(changes[1]!.detail).toMatchObject({ before: { releasePolicy: 'auto' }, after: { releasePolicy: 'auto', autoReleaseAllows: everyQcCode } })
    const bad = await ctx.manager.request('PUT', `${ctx.base}/release-settings`, { releasePolicy: 'sometimes', fourEyes: false })
    expect(bad.status).toBe(422)
    expect(bad.body.errors[0].path).toBe('releasePolicy')
  })
})

describe('the lab reviewer role', () => {
  it('reviews its own lab only (another lab is 404) and cannot manage instruments, keys, grants or the release rule', async () => {
    const ctx = await reviewedLab()
    const other = await reviewedLab()
    const acq = await ctx.post()
    const theirs = await other.post()
    const r = ctx.reviewer
    expect((await r.get(`/api/console/labs/${ctx.lab.id}`)).status).toBe(200)
    expect((await r.get(`${ctx.base}/acquisitions/${acq.id}`)).status).toBe(200)
    expect((await r.get('/api/console/labs')).body.items.map((l: { id: string }) => l.id)).toEqual([ctx.lab.id])
    expect((await r.get(`/api/console/labs/${other.lab.id}`)).status).toBe(404)
    expect((await r.get(`${other.base}/review`)).status).toBe(404)
    expect((await r.get(`${other.base}/acquisitions/${theirs.id}`)).status).toBe(404)
    expect((await r.post(`${other.base}/results/${theirs.result.id}/release`, {})).status).toBe(404)
    // Another lab's result named under one's own lab is not there either.
    expect((await r.post(`${ctx.base}/results/${theirs.result.id}/release`, {})).status).toBe(404)
    expect((await r.post(`${ctx.base}/keys`, { name: 'sneaky', scopes: ['results:read'] })).status).toBe(403)
    expect((await r.post(`${ctx.base}/instruments`, { slug: 'ms-9', name: 'x', geometry: { kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } }, validFrom: '2026-01-01T00:00:00Z' })).status).toBe(403)
    expect((await r.post(`${ctx.base}/grants`, { partnerId: ctx.partner.id })).status).toBe(403)
    expect((await r.request('PUT', `${ctx.base}/release-settings`, { releasePolicy: 'auto', autoReleaseAllows: everyQcCode, fourEyes: false })).status).toBe(403)
    expect((await r.get('/api/console/users')).status).toBe(403)
    expect((await r.get(`/api/console/partners/${ctx.partner.id}`)).status).toBe(403)
    // Those without results:review cannot release: admin (the hub's operator, not the lab), viewer, integrator; another lab's manager gets 404.
    for (const role of ['admin', 'viewer'] as const) {
      expect((await (await person(role, null)).post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(403)
    }
    expect((await other.manager.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(404)
    expect((await new ConsoleClient().post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(401)
    expect((await ctx.sql`select review_state from results where id = ${acq.result.id}`)[0]!.review_state).toBe('held')
    expect((await r.post(`${ctx.base}/results/${acq.result.id}/release`, {})).status).toBe(200)
  })

  it('is offered in invitations with a lab, and refused without one', async () => {
    const { admin, lab } = await labWithInstrument({ release: 'review' })
    const without = await admin.post('/api/console/invitations', { email: `${unique('rev')}@example.org`, role: 'lab_reviewer' })
    expect(without.status).toBe(422)
    expect(without.body.errors[0].path).toBe('labId')
    expect((await admin.post('/api/console/invitations', { email: `${unique('rev')}@example.org`, role: 'lab_reviewer', labId: lab.id })).status).toBe(201)
  })
})

describe('bulk release', () => {
  it('releases every named result or none: a refused one is named by its index', async () => {
    const ctx = await reviewedLab()
    const [a, b, c] = [await ctx.post(), await ctx.post(), await ctx.post()]
    await ctx.reviewer.post(`${ctx.base}/results/${b.result.id}/reject`, { comment: 'Re-run.' })
    const refused = await ctx.reviewer.post(`${ctx.base}/results/release`, { resultIds: [a.result.id, b.result.id, c.result.id] })
    expect(refused.status).toBe(409)
    expect(refused.body.errors[0].path).toBe('resultIds.1')
    expect((await ctx.sql`select count(*)::int as n from results where lab_id = ${ctx.lab.id} and review_state = 'released'`)[0]!.n).toBe(0)
    const done = await ctx.reviewer.post(`${ctx.base}/results/release`, { resultIds: [a.result.id, c.result.id], comment: 'Batch reviewed.' })
    expect(done.status).toBe(200)
    expect(done.body.released).toBe(2)
    await until('two result.released messages', () => ctx.messages().filter(m => m.parsed.type === 'result.released').length === 2)
  })
})

/** The results of a sequence's members, by position. */
async function memberResultIds(ctx: Reviewed, sequenceId: string) {
  return ctx.sql<{ id: string, position: number }[]>`select r.id, si.position from sequence_items si join results r on r.acquisition_id = si.acquisition_id
    where si.sequence_id = ${sequenceId} and r.superseded_by is null order by si.position`
}

describe('sequences are held like results', () => {
  it('a processed sequence sends sequence.processed only when released, with who released it', async () => {
    const ctx = await reviewedLab()
    await registerMethod(ctx.key.secret, caseMethod(cases.CO2!))
    const built = buildSequence(cases.CO2!, 4, { noise: false, drawStandards: false })
    const res = await labApi(ctx.key.secret).post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(built.items) })
    expect(res.status).toBe(201)
    const view = sequenceView.parse(res.body)
    expect(view.review.state).toBe('held')
    await new Promise(r => setTimeout(r, 1000))
    expect(ctx.messages().filter(m => m.parsed.type === 'sequence.processed')).toEqual([])
    const queue = await ctx.reviewer.get(`${ctx.base}/review`)
    expect(queue.body.sequences.map((s: { id: string }) => s.id)).toEqual([view.id])
    expect((await ctx.reviewer.post(`${ctx.base}/sequences/${view.id}/reject`, {})).status).toBe(422)
    // Its members' results are held: the outcome built on them cannot go out before them.
    const early = await ctx.reviewer.post(`${ctx.base}/sequences/${view.id}/release`, {})
    expect(early.status).toBe(409)
    expect(early.body.type).toBe('urn:arcwise:problem:members-not-released')
    const memberResults = await memberResultIds(ctx, view.id)
    expect(early.body.detail).toContain(`position ${memberResults[0]!.position} `)
    expect((await ctx.reviewer.post(`${ctx.base}/results/release`, { resultIds: memberResults.map(m => m.id) })).status).toBe(200)
    expect((await ctx.reviewer.post(`${ctx.base}/sequences/${view.id}/release`, { comment: 'Standards within limits.' })).status).toBe(200)
    const message = await until('the sequence.processed message', () => ctx.messages().find(m => m.parsed.type === 'sequence.processed'))
    const data = sequenceEventData.parse(message.parsed.data)
    expect(data).toMatchObject({ id: view.id, reviewedBy: 'Rhea Okafor' })
    expect(data.samples.length).toBeGreaterThan(0)
    const retracted = await ctx.reviewer.post(`${ctx.base}/sequences/${view.id}/retract`, { reason: 'Reference gas contaminated.' })
    expect(retracted.status).toBe(200)
    const after = (await ctx.reviewer.get(`${ctx.base}/sequences/${view.id}`)).body
    expect(after.review).toMatchObject({ state: 'retracted', retractionReason: 'Reference gas contaminated.' })
    const actions = (await ctx.sql`select action from audit_log where target_id = ${view.id} order by at`).map(r => r.action)
    expect(actions).toEqual(['sequence.released', 'sequence.retracted'])
  })

  it('a method version that releases automatically releases a sequence at once only when its members\' results are released', async () => {
    const ctx = await reviewedLab()
    await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'review', autoReleaseAllows: everyQcCode })
    const method = await labApi(ctx.key.secret).post('/api/v1/instruments/ms-1/methods', { name: 'CO2 method', validFrom: '2026-01-01T00:00:00Z', definition: caseMethod(cases.CO2!), releasePolicy: 'auto' })
    expect(method.status).toBe(201)
    expect(method.body.releasePolicy).toBe('auto')
    const built = buildSequence(cases.CO2!, 5, { noise: false, drawStandards: false })
    const held = await labApi(ctx.key.secret).post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(built.items) })
    expect(held.status).toBe(201)
    // The sequence's own acquisitions follow the lab's policy (held), so its outcome waits too.
    expect((await ctx.reviewer.get(`${ctx.base}/review`)).body.results.total).toBe(built.items.length)
    expect(held.body.review).toMatchObject({ state: 'held' })
    // With the lab's results released at once, the method's rule releases the sequence at once.
    await setRelease(ctx.manager, ctx.lab.id, { releasePolicy: 'auto', autoReleaseAllows: everyQcCode })
    const res = await labApi(ctx.key.secret).post('/api/v1/sequences', { instrument: 'ms-1', sequenceId: unique('seq'), acquisitions: membersOf(buildSequence(cases.CO2!, 5, { noise: false, drawStandards: false }).items) })
    expect(res.status).toBe(201)
    expect(res.body.review).toMatchObject({ state: 'released', reviewedBy: null })
    const message = await until('the automatic sequence.processed message', () => ctx.messages().find(m => m.parsed.type === 'sequence.processed'))
    expect(sequenceEventData.parse(message.parsed.data)).toMatchObject({ id: res.body.id, reviewedBy: null })
    expect(ctx.messages().filter(m => m.parsed.type === 'sequence.processed').map(m => m.parsed.data.id)).toEqual([res.body.id])
  })
})
