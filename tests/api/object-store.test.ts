import { createHash } from 'node:crypto'
import { readFileSync } from 'node:fs'
import { join } from 'node:path'
import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { decodeArrays } from '../../server/services/store/arrays'
import { rootDir, testEnv } from '../support/env'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { redateAcquisitions } from '../support/partitions'
import { ConsoleClient, unique, useArcwise } from '../support/server'
import { storeCommand, testStore } from '../support/store'

// Raw data in S3-compatible object storage (issue 23), against npm test's s3rver: the body as
// received and the parsed arrays by SHA-256, deduplicated; the readers reading from the store;
// store:migrate and retention. The store going down: tests/api/object-store-down.test.ts.

await useArcwise()

const store = testStore()
const sha256 = (data: Buffer | string) => createHash('sha256').update(data).digest('hex')
const post = (secret: string, body: string, contentType = 'application/json') =>
  new ConsoleClient().request('POST', '/api/v1/acquisitions', body, { ...bearer(secret), 'content-type': contentType })
const rowOf = async (sql: any, id: string) => (await sql`
  select payload is null as no_payload, raw_sha256, raw_bytes::int, raw_content_type, arrays_sha256, arrays_bytes::int, raw_removed_at from acquisitions where id = ${id}`)[0]
const download = async (cookie: string, path: string) => {
  const res = await fetch(url(path), { headers: { cookie } })
  return { status: res.status, headers: res.headers, bytes: Buffer.from(await res.arrayBuffer()) }
}

describe('raw data in the object store', () => {
  it('keeps the body exactly as sent under its SHA-256, the parsed arrays as float64, and only references in PostgreSQL', async () => {
    const { key, lab, admin, sql } = await labWithInstrument()
    const body = co2Acquisition()
    // Spacing of the lab's own: the stored body is these bytes, not a re-serialisation.
    const sent = JSON.stringify(body, null, 1)
    const res = await post(key.secret, sent)
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    const row = await rowOf(sql, res.body.id)
    expect(row).toMatchObject({ no_payload: true, raw_sha256: sha256(sent), raw_bytes: Buffer.byteLength(sent), raw_content_type: 'application/json', raw_removed_at: null })
    expect((await store.bytes(`raw/${row.raw_sha256}`)).equals(Buffer.from(sent))).toBe(true)
    const arrays = await store.bytes(`arrays/${row.arrays_sha256}`)
    expect(sha256(arrays)).toBe(row.arrays_sha256)
    expect(arrays.length).toBe(row.arrays_bytes)
    const parsed = decodeArrays<typeof body>(arrays)
    expect(parsed.detectors[0]!.values).toEqual(body.detectors[0]!.values)
    expect(parsed.sweep.values).toEqual(body.sweep.values)
    // The console gives the body back byte for byte, with its digest (RFC 9530).
    const raw = await download(admin.cookie, `/api/console/labs/${lab.id}/acquisitions/${res.body.id}/raw`)
    expect(raw.status).toBe(200)
    expect(raw.bytes.equals(Buffer.from(sent))).toBe(true)
    expect(raw.headers.get('repr-digest')).toBe(`sha-256=:${Buffer.from(row.raw_sha256, 'hex').toString('base64')}:`)
    // The console's preview is the start of the body as received.
    const detail = await admin.get(`/api/console/labs/${lab.id}/acquisitions/${res.body.id}`)
    expect(detail.body.payload.head).toBe(sent.slice(0, 6000))
    expect(detail.body.payload).toMatchObject({ chars: Buffer.byteLength(sent), truncated: true })
    expect(detail.body.rawData).toMatchObject({ kept: 'object-store', sha256: row.raw_sha256, bytes: Buffer.byteLength(sent) })
  })

  it('keeps a CSV file as it came, with its Content-Type', async () => {
    const { key, lab, admin, sql } = await labWithInstrument()
    const csv = readFileSync(join(rootDir, 'public', 'templates', 'acquisition.csv'), 'utf8').replace('# runId: CO2-2026-0412', `# runId: ${unique('csv')}`)
    const res = await post(key.secret, csv, 'text/csv')
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    const row = await rowOf(sql, res.body.id)
    expect(row).toMatchObject({ raw_sha256: sha256(csv), raw_content_type: 'text/csv' })
    const raw = await download(admin.cookie, `/api/console/labs/${lab.id}/acquisitions/${res.body.id}/raw`)
    expect(raw.bytes.toString('utf8')).toBe(csv)
    expect(raw.headers.get('content-type')).toContain('text/csv')
  })

  it('stores the same body once, whoever sends it: a second lab\'s identical upload references the same objects', async () => {
    const a = await labWithInstrument()
    const b = await labWithInstrument()
    const sent = JSON.stringify(co2Acquisition(unique('twice')))
    const first = await post(a.key.secret, sent)
    expect(first.status).toBe(201)
    const rowA = await rowOf(a.sql, first.body.id)
    const before = await store.head(`raw/${rowA.raw_sha256}`)
    const arraysBefore = await store.head(`arrays/${rowA.arrays_sha256}`)
    // s3rver's Last-Modified has whole seconds: a rewrite a second later would show.
    await new Promise(r => setTimeout(r, 1100))
    const second = await post(b.key.secret, sent)
    expect(second.status).toBe(201)
    const rowB = await rowOf(b.sql, second.body.id)
    expect(rowB.raw_sha256).toBe(rowA.raw_sha256)
    expect(rowB.arrays_sha256).toBe(rowA.arrays_sha256)
    expect(await store.keys(`raw/${rowA.raw_sha256}`)).toEqual([`raw/${rowA.raw_sha256}`])
    expect((await store.head(`raw/${rowA.raw_sha256}`))!.lastModified).toEqual(before!.lastModified)
    expect((await store.head(`arrays/${rowA.arrays_sha256}`))!.lastModified).toEqual(arraysBefore!.lastModified)
  })

  it('serves the spectrum and its exports from the store (gone from the store, they answer 410, the result stays)', async () => {
    const { key, lab, admin, sql } = await labWithInstrument()
    const res = await post(key.secret, JSON.stringify(co2Acquisition()))
    const base = `/api/console/labs/${lab.id}/acquisitions/${res.body.id}`
    const spectrum = await download(admin.cookie, `${base}/spectrum`)
    expect(spectrum.status).toBe(200)
    expect(spectrum.bytes.length).toBe(4000 * 16)
    const csv = await download(admin.cookie, `${base}/spectrum.csv`)
    expect(csv.bytes.toString('utf8').trim().split('\n').filter(l => !l.startsWith('#')).length).toBe(4001)
    expect((await download(admin.cookie, `${base}/spectrum.jdx`)).status).toBe(200)
    const payload = await download(admin.cookie, `${base}/payload.json`)
    expect(JSON.parse(payload.bytes.toString('utf8')).detectors[0].values).toHaveLength(4000)
    // Take the arrays object away behind the hub's back: every reader of raw data notices.
    const row = await rowOf(sql, res.body.id)
    await store.remove(`arrays/${row.arrays_sha256}`)
    for (const path of ['spectrum', 'spectrum.csv', 'spectrum.jdx', 'payload.json']) {
      const gone = await admin.get(`${base}/${path}`)
      expect(gone.status, path).toBe(410)
      expect(gone.body.type).toBe('urn:arcwise:problem:raw-data-missing')
    }
    expect((await admin.get(base)).body.result.peaks.length).toBeGreaterThan(0)
  })

  it('writes a new key without asking the store first, and asks before writing a key claimed already', async () => {
    const a = await labWithInstrument()
    const b = await labWithInstrument()
    // Store calls so far, whatever their outcome, from /metrics.
    const calls = async () => {
      const metrics = await (await fetch(url('/metrics'), { headers: { authorization: `Bearer ${testEnv().serverEnv.NUXT_METRICS_TOKEN}` } })).text()
      const sum = (op: string) => [...metrics.matchAll(new RegExp(`arcwise_store_call_duration_seconds_count\\{op="${op}",outcome="[a-z-]+"\\} (\\d+)`, 'g'))].reduce((n, m) => n + Number(m[1]), 0)
      return { head: sum('head'), put: sum('put') }
    }
    const sent = JSON.stringify(co2Acquisition(unique('fresh')))
    const before = await calls()
    expect((await post(a.key.secret, sent)).status).toBe(201)
    const afterNew = await calls()
    expect(afterNew).toEqual({ head: before.head, put: before.put + 2 })
    // The same bytes from another lab: both keys are claimed already, so the store is asked, and nothing is written.
    expect((await post(b.key.secret, sent)).status).toBe(201)
    expect(await calls()).toEqual({ head: afterNew.head + 2, put: afterNew.put })
  })

  it('counts store calls and their latency in /metrics, and /readyz checks the store', async () => {
    const metrics = await (await fetch(url('/metrics'), { headers: { authorization: `Bearer ${testEnv().serverEnv.NUXT_METRICS_TOKEN}` } })).text()
    const count = (op: string) => Number(new RegExp(`arcwise_store_call_duration_seconds_count\\{op="${op}",outcome="ok"\\} (\\d+)`).exec(metrics)?.[1] ?? 0)
    expect(count('put')).toBeGreaterThan(0)
    expect(count('head')).toBeGreaterThan(0)
    expect(count('get')).toBeGreaterThan(0)
    expect(metrics).toMatch(/arcwise_store_call_duration_seconds_bucket\{le="0.005",op="put",outcome="ok"\}/)
    const ready = await (await fetch(url('/readyz'))).json()
    expect(ready.checks.store).toMatchObject({ ok: true })
  })

  it('store:migrate moves a row from before the store into it, clears its JSON, and changes nothing a reader sees; run again, it moves nothing', async () => {
    const { key, lab, admin, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const res = await post(key.secret, JSON.stringify(body))
    const base = `/api/console/labs/${lab.id}/acquisitions/${res.body.id}`
    const csvBefore = (await download(admin.cookie, `${base}/spectrum.csv`)).bytes
    // Made into a row as acquisitions were stored before issue 23: the body as jsonb, no references, nothing in the store.
    const row = await rowOf(sql, res.body.id)
    await store.remove(`arrays/${row.arrays_sha256}`)
    await store.remove(`raw/${row.raw_sha256}`)
    await sql`update acquisitions set payload = ${sql.json(body)}, raw_sha256 = null, raw_bytes = null, raw_content_type = null, arrays_sha256 = null, arrays_bytes = null where id = ${res.body.id}`
    expect((await download(admin.cookie, `${base}/spectrum.csv`)).bytes.equals(csvBefore)).toBe(true)
    const out = storeCommand('store-migrate')
    expect(out).toMatch(/moved [1-9]\d* acquisition payload\(s\) into the object store; 0 left in PostgreSQL/)
    const moved = await rowOf(sql, res.body.id)
    expect(moved).toMatchObject({ no_payload: true, raw_content_type: 'application/json' })
    expect(moved.arrays_sha256).toMatch(/^[0-9a-f]{64}$/)
    expect(decodeArrays<typeof body>(await store.bytes(`arrays/${moved.arrays_sha256}`)).sweep.values).toEqual(body.sweep.values)
    expect(sha256(await store.bytes(`raw/${moved.raw_sha256}`))).toBe(moved.raw_sha256)
    expect((await download(admin.cookie, `${base}/spectrum.csv`)).bytes.equals(csvBefore)).toBe(true)
    expect(storeCommand('store-migrate')).toMatch(/moved 0 acquisition payload\(s\)/)
  })

  it('retention removes an expired lab\'s raw data and its objects, keeps objects another lab still references, and keeps the results', async () => {
    const expiring = await labWithInstrument()
    const keeping = await labWithInstrument()
    const { admin, sql } = expiring
    expect((await admin.patch(`/api/console/labs/${expiring.lab.id}`, { rawRetentionDays: 0 })).status).toBe(422)
    expect((await admin.patch(`/api/console/labs/${expiring.lab.id}`, { rawRetentionDays: 30 })).body.rawRetentionDays).toBe(30)
    const ownBody = JSON.stringify(co2Acquisition())
    const own = await post(expiring.key.secret, ownBody)
    const sharedBody = JSON.stringify(co2Acquisition(unique('shared')))
    const shared = await post(expiring.key.secret, sharedBody)
    const kept = await post(keeping.key.secret, sharedBody)
    const recent = await post(expiring.key.secret, JSON.stringify(co2Acquisition()))
    const inFlight = await post(expiring.key.secret, JSON.stringify(co2Acquisition()))
    for (const r of [own, shared, kept, recent, inFlight]) expect(r.status).toBe(201)
    const ownRow = await rowOf(sql, own.body.id)
    const sharedRow = await rowOf(sql, shared.body.id)
    const inFlightRow = await rowOf(sql, inFlight.body.id)
    // Received 31 days ago, past the lab's 30.
    await redateAcquisitions(sql, [own.body.id, shared.body.id, inFlight.body.id], new Date(Date.now() - 31 * 86_400_000).toISOString())
    // An upload being processed (its lease an hour ahead, so no worker takes it) still needs these objects.
    const [upload] = await sql`insert into uploads (lab_id, api_key_id, status, lease_until, raw_sha256, arrays_sha256)
      values (${expiring.lab.id}, ${expiring.key.id}, 'processing', now() + interval '1 hour', ${inFlightRow.raw_sha256}, ${inFlightRow.arrays_sha256}) returning id`
    storeCommand('store-retention', ['--grace-seconds', '0'])
    await sql`update uploads set status = 'failed', lease_until = null where id = ${upload!.id}`
    expect((await rowOf(sql, inFlight.body.id)).raw_removed_at).not.toBeNull()
    expect(await store.head(`raw/${inFlightRow.raw_sha256}`)).not.toBeNull()
    expect(await store.head(`arrays/${inFlightRow.arrays_sha256}`)).not.toBeNull()
    expect((await rowOf(sql, own.body.id)).raw_removed_at).not.toBeNull()
    expect((await rowOf(sql, shared.body.id)).raw_removed_at).not.toBeNull()
    expect((await rowOf(sql, recent.body.id)).raw_removed_at).toBeNull()
    expect((await rowOf(sql, kept.body.id)).raw_removed_at).toBeNull()
    expect(await store.head(`raw/${ownRow.raw_sha256}`)).toBeNull()
    expect(await store.head(`arrays/${ownRow.arrays_sha256}`)).toBeNull()
    // The other lab's acquisition of the same bytes keeps them, and its spectrum.
    expect(await store.head(`raw/${sharedRow.raw_sha256}`)).not.toBeNull()
    expect(await store.head(`arrays/${sharedRow.arrays_sha256}`)).not.toBeNull()
    expect((await keeping.admin.get(`/api/console/labs/${keeping.lab.id}/acquisitions/${kept.body.id}/spectrum.csv`)).status).toBe(200)
    // Results and their numbers stay; the console says why the raw data is gone.
    const base = `/api/console/labs/${expiring.lab.id}/acquisitions/${own.body.id}`
    const detail = await admin.get(base)
    expect(detail.body.result.peaks.length).toBeGreaterThan(0)
    expect(detail.body.rawData).toMatchObject({ kept: 'removed', retentionDays: 30 })
    const gone = await admin.get(`${base}/spectrum.csv`)
    expect(gone.status).toBe(410)
    expect(gone.body.detail).toMatch(/removed on \d{4}-\d{2}-\d{2} under the lab's retention setting/)
    expect((await admin.get(`/api/console/labs/${expiring.lab.id}/acquisitions/${recent.body.id}/spectrum.csv`)).status).toBe(200)
    // The same bytes sent again after retention deleted them (and their claims) are stored again.
    const again = await post(keeping.key.secret, ownBody)
    expect(again.status).toBe(201)
    expect((await store.bytes(`raw/${ownRow.raw_sha256}`)).toString('utf8')).toBe(ownBody)
    expect(await store.head(`arrays/${ownRow.arrays_sha256}`)).not.toBeNull()
    expect((await keeping.admin.get(`/api/console/labs/${keeping.lab.id}/acquisitions/${again.body.id}/spectrum.csv`)).status).toBe(200)
  })
})
