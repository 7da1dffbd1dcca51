import { url } from '@nuxt/test-utils/e2e'
import { base64url, compactVerify, createLocalJWKSet, decodeProtectedHeader, flattenedVerify, type JSONWebKeySet } from 'jose'
import { extractText, getDocumentProxy } from 'unpdf'
import { describe, expect, it } from 'vitest'
import { CAUTION, CAUTION_SHORT } from '../../shared/caution'
import { certificateVerdict } from '../../shared/schemas/certificates'
import { buildSequence, caseMethod, cases } from '../support/deltaSequences'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { lab as labApi, membersOf, registerMethod } from '../support/sequences'
import { ConsoleClient, expectRateLimited, testDb, unique, useArcwise } from '../support/server'

// Certificates of analysis (issue 20, point 4) and exports that say what they are (point 5).
// Results are released here directly in SQL, as a reviewer's approval leaves the row: these
// tests need released rows, not the review flow (tests/api/review.test.ts covers that, with
// its events and four eyes).

const VERIFY_PER_MINUTE = 40
await useArcwise({ env: { NUXT_RATE_LIMIT_VERIFY_PER_MINUTE: String(VERIFY_PER_MINUTE) } })

const sql = testDb()
const api = (secret: string) => labApi(secret)

/** What a reviewer's approval leaves on a result (or sequence) row. */
async function release(table: 'results' | 'sequences', where: { acquisitionId?: string, id?: string }) {
  const [admin] = await sql`select id from users where email = ${demoUser('admin').email}`
  if (table === 'results') await sql`update results set review_state = 'released', released_at = now(), reviewed_by = ${admin!.id}, reviewed_at = now() where acquisition_id = ${where.acquisitionId!}`
  else await sql`update sequences set review_state = 'released', released_at = now(), reviewed_by = ${admin!.id}, reviewed_at = now() where id = ${where.id!}`
}

async function partnerToken(admin: ConsoleClient, labId?: string) {
  const partner = (await admin.post('/api/console/partners', { slug: unique('p'), name: 'Certificate reader', kind: 'regulator', contactEmail: 'r@example.org' })).body
  if (labId) expect((await admin.post(`/api/console/labs/${labId}/grants`, { partnerId: partner.id })).status).toBe(201)
  const client = (await admin.post(`/api/console/partners/${partner.id}/clients`, { name: 'files' })).body
  const res = await fetch(url('/api/v1/oauth/token'), {
    method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' },
    body: new URLSearchParams({ grant_type: 'client_credentials', client_id: client.clientId, client_secret: client.clientSecret }),
  })
  return (await res.json() as { access_token: string }).access_token
}

async function download(path: string, headers: Record<string, string>) {
  const res = await fetch(url(path), { headers })
  return { status: res.status, type: res.headers.get('content-type') ?? '', disposition: res.headers.get('content-disposition') ?? '', bytes: Buffer.from(await res.arrayBuffer()) }
}

const jwks = async () => createLocalJWKSet(await (await fetch(url('/.well-known/jwks.json'))).json() as JSONWebKeySet)
const verify = (body: unknown) => new ConsoleClient().post('/api/v1/certificates/verify', body)
/** The canonical text with one byte changed: a digit of the first δ value. */
function tamper(canonical: string) {
  const at = canonical.indexOf('"value":') + 9
  const digit = canonical[at] === '9' ? '8' : '9'
  return canonical.slice(0, at) + digit + canonical.slice(at + 1)
}
async function pdfText(bytes: Buffer) {
  return ((await extractText(await getDocumentProxy(new Uint8Array(bytes)), { mergePages: true })).text as string).replace(/\s+/g, ' ')
}

async function releasedResult() {
  // Held for review, as these tests expect; they release in SQL (labWithInstrument() alone releases at once).
  const ctx = await labWithInstrument({ release: 'review' })
  const posted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(ctx.key.secret))
  expect(posted.status).toBe(201)
  return { ...ctx, id: posted.body.id as string }
}

describe('a released result\'s certificate', () => {
  it('has none while held: 409 to its lab, 404 to a granted partner; nothing is stored', async () => {
    const { admin, lab, key, id } = await releasedResult()
    const token = await partnerToken(admin, lab.id)
    const [state] = await sql`select review_state from results where acquisition_id = ${id}`
    expect(state!.review_state).toBe('held')
    for (const ext of ['pdf', 'jws', 'json']) {
      const own = await api(key.secret).get(`/api/v1/results/${id}/certificate.${ext}`)
      expect(own.status).toBe(409)
      expect(own.body).toMatchObject({ type: 'urn:arcwise:problem:not-released' })
      expect(own.body.detail).toContain('held')
      const partner = await new ConsoleClient().request('GET', `/api/v1/results/${id}/certificate.${ext}`, undefined, { authorization: `Bearer ${token}` })
      expect(partner.status).toBe(404)
    }
    expect((await admin.get(`/api/console/labs/${lab.id}/acquisitions/${id}/certificate.pdf`)).status).toBe(409)
    expect((await sql`select count(*)::int as n from certificates c join results r on r.id = c.subject_id where r.acquisition_id = ${id}`)[0]!.n).toBe(0)
  })

  it('verifies with jose against /.well-known/jwks.json over the canonical JSON, and fails when one byte changes', async () => {
    const { key, id } = await releasedResult()
    await release('results', { acquisitionId: id })
    const json = await download(`/api/v1/results/${id}/certificate.json`, bearer(key.secret))
    const jws = await download(`/api/v1/results/${id}/certificate.jws`, bearer(key.secret))
    expect(json.status).toBe(200)
    expect(jws.type).toContain('application/jose')
    const canonical = json.bytes.toString('utf8')
    const detached = jws.bytes.toString('utf8')
    const [header, middle, signature] = detached.split('.')
    expect(middle).toBe('') // RFC 7515 Appendix F: the payload is not in the JWS.
    expect(decodeProtectedHeader(detached)).toMatchObject({ alg: 'ES256' })
    const keys = await jwks()
    const payload = base64url.encode(json.bytes)
    const flat = await flattenedVerify({ protected: header!, payload, signature: signature! }, keys)
    expect(Buffer.from(flat.payload).toString('utf8')).toBe(canonical)
    await compactVerify(`${header}.${payload}.${signature}`, keys)
    await expect(flattenedVerify({ protected: header!, payload: base64url.encode(tamper(canonical)), signature: signature! }, keys)).rejects.toThrow()

    const doc = JSON.parse(canonical)
    expect(json.disposition).toBe(`attachment; filename="${doc.certificate.number}.json"`)
    expect(doc.certificate.number).toMatch(/^AW-\d{4}-\d{6}$/)
    expect(doc).toMatchObject({ format: 'arcwise-certificate/1', subject: { type: 'result', acquisitionId: id, version: 1 }, calibrated: false, review: { state: 'released', reviewedBy: expect.any(String) }, caution: { short: CAUTION_SHORT, text: CAUTION } })
    expect(doc.versions).toMatchObject({ geometry: [1], calibration: [], method: null, engine: [expect.any(String)], constants: [expect.stringContaining('CODATA')] })
    expect(doc.values.ratios[0].delta).toMatchObject({ name: 'δ13C', scale: 'VPDB', unit: '‰', k: 2 })
    expect(doc.values.ratios[0].delta.U).toBeCloseTo(2 * doc.values.ratios[0].delta.u, 12)

    // Asked again: the same certificate, issued once and audited once.
    expect((await download(`/api/v1/results/${id}/certificate.jws`, bearer(key.secret))).bytes.toString()).toBe(detached)
    const rows = await sql`select number, kid from certificates where subject = 'result' and subject_id = ${doc.subject.id}`
    expect(rows).toHaveLength(1)
    expect(rows[0]!.kid).toBe(decodeProtectedHeader(detached).kid)
    expect((await sql`select count(*)::int as n from audit_log where action = 'certificate.issued' and detail->>'number' = ${doc.certificate.number}`)[0]!.n).toBe(1)
  })

  it('the verify route answers valid, or invalid with the reason, by files or by number; bad input names the field', async () => {
    const { admin, key, lab, id } = await releasedResult()
    await release('results', { acquisitionId: id })
    const canonical = (await download(`/api/v1/results/${id}/certificate.json`, bearer(key.secret))).bytes.toString('utf8')
    const jws = (await download(`/api/v1/results/${id}/certificate.jws`, bearer(key.secret))).bytes.toString('utf8')
    const doc = JSON.parse(canonical)

    const good = await verify({ canonical, jws })
    expect(good.status).toBe(200)
    certificateVerdict.parse(good.body)
    expect(good.body).toMatchObject({
      valid: true, reason: null, kid: decodeProtectedHeader(jws).kid, canonicalForm: true, issuedByThisHub: true,
      certificate: { number: doc.certificate.number, issuedAt: doc.certificate.issuedAt },
      certifies: { subject: 'result', lab: lab.name, runId: doc.acquisition.runId, version: 1 },
      status: { state: 'released', corrected: false, retracted: false },
    })
    expect(good.body.certifies.values[0]).toMatch(/^δ13C \(VPDB\) = /)

    const bad = await verify({ canonical: tamper(canonical), jws })
    expect(bad.body).toMatchObject({ valid: false, reason: 'signature-mismatch', issuedByThisHub: false })
    const reordered = await verify({ canonical: JSON.stringify(doc, null, 1), jws })
    expect(reordered.body).toMatchObject({ valid: false, canonicalForm: false })
    const unknownKey = `${base64url.encode(JSON.stringify({ alg: 'ES256', kid: 'nobody' }))}..${jws.split('.')[2]}`
    expect((await verify({ canonical, jws: unknownKey })).body).toMatchObject({ valid: false, reason: 'unknown-key' })
    expect((await verify({ canonical, jws: 'not a jws' })).body).toMatchObject({ valid: false, reason: 'malformed-jws' })

    const byNumber = await verify({ number: doc.certificate.number })
    // By number alone: whether it stands, never what it certifies (numbers run in order).
    expect(byNumber.body).toMatchObject({ valid: true, issuedByThisHub: true, certifies: null })
    // The hub's key also signs partners' access tokens: such a signature is no certificate.
    const token = await partnerToken(admin, lab.id)
    const [tokenHeader, tokenPayload, tokenSignature] = token.split('.')
    const tokenJson = new TextDecoder().decode(base64url.decode(tokenPayload!))
    expect((await verify({ canonical: tokenJson, jws: `${tokenHeader}..${tokenSignature}` })).body).toMatchObject({ valid: false, reason: 'not-a-certificate' })
    const missing = await verify({ number: 'AW-1999-000001' })
    expect(missing.status).toBe(404)
    const noJws = await verify({ canonical })
    expect(noJws.status).toBe(422)
    expect(noJws.body.errors.map((e: any) => e.path)).toEqual(['jws'])
    expect((await verify({ number: 'nope' })).body.errors[0].path).toBe('number')
  })

  it('the PDF, read back with unpdf, holds the lab, the δ value with its u and k, the reviewer, the number and the caution; a partner gets it through its grant', async () => {
    const { admin, lab, key, id } = await releasedResult()
    await release('results', { acquisitionId: id })
    const token = await partnerToken(admin, lab.id)
    const pdf = await download(`/api/v1/results/${id}/certificate.pdf`, { authorization: `Bearer ${token}` })
    expect(pdf.status).toBe(200)
    expect(pdf.type).toBe('application/pdf')
    const text = await pdfText(pdf.bytes)
    const doc = JSON.parse((await download(`/api/v1/results/${id}/certificate.json`, bearer(key.secret))).bytes.toString('utf8'))
    const delta = doc.values.ratios[0].delta
    const printed = new RegExp(`δ13C \\(VPDB\\) = (−?[\\d.]+) ± ([\\d.]+) ‰ \\(u\\), k = 2, U = ([\\d.]+) ‰`).exec(text)
    expect(printed, text.slice(0, 2000)).not.toBeNull()
    const [value, u, U] = printed!.slice(1).map(s => Number(s.replace('−', '-')))
    expect(Math.abs(value! - delta.value)).toBeLessThanOrEqual(delta.u / 10)
    expect(u).toBeCloseTo(delta.u, 2)
    expect(U).toBeCloseTo(delta.U, 2)
    for (const expected of [doc.certificate.number, lab.name, doc.acquisition.runId, doc.review.reviewedBy, doc.review ? `key ${decodeProtectedHeader((await download(`/api/v1/results/${id}/certificate.jws`, bearer(key.secret))).bytes.toString()).kid}` : '', CAUTION, 'not calibrated']) {
      expect(text).toContain(expected)
    }
    // Another partner, without the grant: as if it were not there.
    const stranger = await partnerToken(admin)
    expect((await download(`/api/v1/results/${id}/certificate.pdf`, { authorization: `Bearer ${stranger}` })).status).toBe(404)
    // The console's download on the acquisition page is the same certificate.
    const consolePdf = await download(`/api/console/labs/${lab.id}/acquisitions/${id}/certificate.pdf`, { cookie: admin.cookie })
    expect(consolePdf.status).toBe(200)
    expect(await pdfText(consolePdf.bytes)).toContain(doc.certificate.number)
  })

  it('after a correction the old certificate says it was corrected, the new version gets its own; a retraction is shown on verify and on the PDF', async () => {
    const { key, id } = await releasedResult()
    await release('results', { acquisitionId: id })
    const first = JSON.parse((await download(`/api/v1/results/${id}/certificate.json`, bearer(key.secret))).bytes.toString('utf8'))
    // A corrected version 2, released (what reprocessing and review will write).
    const [v2] = await sql`
      insert into results (acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, version, supersedes, correction_reason, review_state, released_at)
      select acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, 2, id, 'back-dated calibration', 'released', now() from results where acquisition_id = ${id} and version = 1
      returning id`
    await sql`update results set superseded_by = ${v2!.id} where acquisition_id = ${id} and version = 1`
    const old = await verify({ number: first.certificate.number })
    expect(old.body).toMatchObject({ valid: true, certifies: null, status: { corrected: true, correctedBy: { resultId: v2!.id, version: 2, reason: null } } })
    const oldJws = (await download(`/api/v1/results/${id}/certificate.jws`, bearer(key.secret))).bytes.toString('utf8')
    expect(oldJws.length).toBeGreaterThan(0)
    const second = JSON.parse((await download(`/api/v1/results/${id}/certificate.json`, bearer(key.secret))).bytes.toString('utf8'))
    expect(second.certificate.number).not.toBe(first.certificate.number)
    expect(second.subject).toMatchObject({ id: v2!.id, version: 2 })
    expect(second.review).toMatchObject({ version: 2, supersedes: first.subject.id, correctionReason: 'back-dated calibration' })

    await sql`update results set review_state = 'retracted', retracted_at = now(), retraction_reason = 'sample label swapped' where id = ${v2!.id}`
    expect((await verify({ number: second.certificate.number })).body).toMatchObject({ valid: true, status: { state: 'retracted', retracted: true, retractionReason: null } })
    const text = await pdfText((await download(`/api/v1/results/${id}/certificate.pdf`, bearer(key.secret))).bytes)
    expect(text).toContain('RETRACTED')
    expect(text).toContain('sample label swapped')
  })
})

describe('a certificate asked for while the result changes', () => {
  it('is not issued for a result whose retraction commits while the certificate is being issued', async () => {
    const { key, id } = await releasedResult()
    await release('results', { acquisitionId: id })
    let asked: Promise<{ status: number, body: any }> | undefined
    // A retraction in flight, as the review capability makes it: the acquisition's row locked, the result retracted, not yet committed.
    await sql.begin(async (tx) => {
      await tx`select 1 from acquisitions where id = ${id} for update`
      await tx`update results set review_state = 'retracted', retracted_at = now(), retraction_reason = 'Vial mix-up found at the audit.' where acquisition_id = ${id}`
      asked = api(key.secret).get(`/api/v1/results/${id}/certificate.jws`)
      await new Promise(r => setTimeout(r, 1000))
    })
    const res = await asked!
    expect(res.status).toBe(409)
    expect(res.body.type).toBe('urn:arcwise:problem:not-released')
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from certificates c join results r on r.id = c.subject_id where r.acquisition_id = ${id}`
    expect(n).toBe(0)
  })
})

describe('a released sequence\'s certificate', () => {
  it('certifies each sample\'s normalised δ with u and k, verifies with jose, and prints them', async () => {
    const ctx = await labWithInstrument({ release: 'review' })
    await registerMethod(ctx.key.secret, caseMethod(cases.CO2!))
    const built = buildSequence(cases.CO2!, 4, { noise: false, drawStandards: false })
    const sequenceId = unique('seq')
    const posted = await api(ctx.key.secret).post('/api/v1/sequences', { instrument: 'ms-1', sequenceId, acquisitions: membersOf(built.items) })
    expect(posted.status).toBe(201)
    expect((await api(ctx.key.secret).get(`/api/v1/sequences/${sequenceId}/certificate.jws`)).status).toBe(409)
    await release('sequences', { id: posted.body.id })
    const canonical = (await download(`/api/v1/sequences/${sequenceId}/certificate.json`, bearer(ctx.key.secret))).bytes.toString('utf8')
    const jws = (await download(`/api/v1/sequences/${sequenceId}/certificate.jws`, bearer(ctx.key.secret))).bytes.toString('utf8')
    const [h, , s] = jws.split('.')
    await flattenedVerify({ protected: h!, payload: base64url.encode(canonical), signature: s! }, await jwks())
    const doc = JSON.parse(canonical)
    expect(doc.subject).toMatchObject({ type: 'sequence', sequenceId })
    expect(doc.versions.method).toMatchObject({ version: 1 })
    expect(doc.values.samples).toHaveLength(built.samples.length)
    const sample = doc.values.samples[0]
    const d13 = sample.values.find((v: any) => v.quantity === 'δ13C')
    expect(d13).toMatchObject({ scale: 'VPDB', unit: '‰' })
    expect(d13.U).toBeCloseTo(d13.k * d13.u, 12)
    const item = posted.body.outcome.items.find((i: any) => i.position === sample.position)
    expect(d13.value).toBe(item.final['δ13C'].value)
    expect((await verify({ canonical, jws })).body).toMatchObject({ valid: true, certifies: { subject: 'sequence', sequenceId } })
    const text = await pdfText((await download(`/api/console/labs/${ctx.lab.id}/sequences/${posted.body.id}/certificate.pdf`, { cookie: ctx.admin.cookie })).bytes)
    expect(text).toContain(`Position ${sample.position}`)
    expect(text).toMatch(/δ13C \(VPDB\) = −?[\d.]+ ± [\d.]+ ‰ \(u\), k = [\d.]+, U = [\d.]+ ‰/)
    expect(text).toContain(CAUTION)
  })
})

describe('exports say what they are', () => {
  it('CSV carries # comments and JCAMP-DX ##$ labels with the review state, the caution\'s short form, calibrated and the versions; both read back', async () => {
    const { key, id } = await releasedResult()
    const held = String((await api(key.secret).get(`/api/v1/acquisitions/${id}/spectrum.csv`)).body)
    expect(held).toContain('# reviewState: held')
    await release('results', { acquisitionId: id })
    const csv = String((await api(key.secret).get(`/api/v1/acquisitions/${id}/spectrum.csv`)).body)
    const comments = new Map(csv.split('\n').filter(l => l.startsWith('# ') && l.includes(': ')).map(l => [l.slice(2, l.indexOf(': ')), l.slice(l.indexOf(': ') + 2)]))
    expect(Object.fromEntries(comments)).toMatchObject({
      resultVersion: '1', reviewState: 'released', calibrated: 'false', geometryVersion: '1', calibrationVersion: 'none', method: 'none',
      engineVersion: expect.stringMatching(/^\d+\.\d+\.\d+$/), constants: expect.stringContaining('CODATA'), caution: CAUTION_SHORT,
    })
    expect(Date.parse(comments.get('releasedAt')!)).toBeGreaterThan(0)
    const rows = csv.trim().split('\n').filter(l => !l.startsWith('#'))
    expect(rows[0]).toBe('mz,signal_A')
    expect(rows).toHaveLength(4001)

    const jdx = String((await api(key.secret).get(`/api/v1/acquisitions/${id}/spectrum.jdx`)).body)
    const { convert } = await import('jcampconverter')
    const parsed = convert(jdx, { keepRecordsRegExp: /^\$/ }).flatten[0]!
    expect(parsed.spectra[0]!.data.x).toHaveLength(4000)
    const info = parsed.meta as Record<string, unknown>
    expect(info).toMatchObject({
      'ARCWISE REVIEW STATE': 'released', 'ARCWISE CALIBRATED': false, 'ARCWISE GEOMETRY VERSION': 1, 'ARCWISE CALIBRATION VERSION': 'none',
      'ARCWISE METHOD': 'none', 'ARCWISE RESULT VERSION': 1, 'ARCWISE CAUTION': CAUTION_SHORT,
    })
    expect(String(info['ARCWISE CONSTANTS'])).toContain('CODATA')
  })
})

describe('the verify route is public and limited per address', () => {
  it(`answers 429 with Retry-After past ${VERIFY_PER_MINUTE} checks a minute`, async () => {
    let last
    for (let i = 0; i <= VERIFY_PER_MINUTE; i++) last = await verify({ number: 'AW-1999-000001' })
    expectRateLimited(last!)
  })
})
