import { readdirSync, readFileSync } from 'node:fs'
import { request as httpRequest, type IncomingHttpHeaders } from 'node:http'
import { createDeflate } from 'node:zlib'
import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { rowCounts as allRowCounts, rowsWritten } from '../../scripts/lib/fuzz'
import { demoUser } from '../support/demo'
import { testEnv } from '../support/env'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

// What one lab key, or no sign-in at all, could try against the hub's readers: bodies past
// the cap with and without Content-Length, text built to make regular expressions backtrack,
// compressed bombs, prototype names, run times in the future. Every refusal is a problem
// document and writes no row. No worker and no rate limiter run here, so any row that
// appears was written by a refused request. The upload cap is lowered to 4 MB so that a body
// past it is quick to send; the JSON routes keep their 1 MB.
const UPLOAD_CAP = 4 * 1024 * 1024
await useArcwise({ env: { NUXT_PROCESS_ROLE: 'web', NUXT_RATE_LIMIT_PER_MINUTE: '0', NUXT_INGEST_MAX_UPLOAD_BYTES: String(UPLOAD_CAP) } })

/**
 * Row counts of every table but schema_usage, which a timer fills from the uses counted by
 * the acquisitions this file does accept (a use is counted only after an acquisition is written).
 */
async function rowCounts(sql: ReturnType<typeof testDb>) {
  const { schema_usage: _later, ...rest } = await allRowCounts(sql)
  return rest
}

interface Answer { status: number, body: any, headers: IncomingHttpHeaders, sentBytes: number }

/**
 * Streams a body with node:http (chunked unless `contentLength` is given) until the server
 * answers or `totalBytes` are sent, and says how much had been sent when the answer came.
 */
function streamUntilAnswered(path: string, headers: Record<string, string>, opts: { chunk: Buffer, totalBytes: number, head?: Buffer }): Promise<Answer> {
  return new Promise((resolve, reject) => {
    let sentBytes = 0
    let answered = false
    const req = httpRequest(url(path), { method: 'POST', headers }, (res) => {
      answered = true
      const sentAtAnswer = sentBytes
      const parts: Buffer[] = []
      res.on('data', c => parts.push(c))
      res.on('end', () => {
        const text = Buffer.concat(parts).toString('utf8')
        let body: unknown = text
        try { body = JSON.parse(text) }
        catch { /* not JSON: keep the text */ }
        resolve({ status: res.statusCode ?? 0, body, headers: res.headers, sentBytes: sentAtAnswer })
        req.destroy()
      })
    })
    // Once answered, the server may close while this side still writes: that is the point.
    req.on('error', (error) => { if (!answered) reject(error) })
    if (opts.head) { req.write(opts.head); sentBytes += opts.head.length }
    const pump = () => {
      while (!answered && sentBytes < opts.totalBytes) {
        sentBytes += opts.chunk.length
        if (!req.write(opts.chunk)) { req.once('drain', pump); return }
      }
      if (!answered) req.end()
    }
    pump()
  })
}

const post = (path: string, body: string | Buffer | FormData, headers: Record<string, string>) =>
  fetch(url(path), { method: 'POST', headers, body: body as BodyInit }).then(async (r) => {
    const text = await r.text()
    let parsed: any = text
    try { parsed = JSON.parse(text) }
    catch { /* not JSON */ }
    return { status: r.status, body: parsed, type: r.headers.get('content-type') ?? '' }
  })

const paths = (body: any): string[] => (body?.errors ?? []).map((e: any) => e.path)

function csvWithHeader(runId: string, lines: string[]) {
  return ['# instrument: ms-1', `# runId: ${runId}`, '# acquiredAt: 2026-11-30T09:00:00Z', ...lines, '0.47,5', '0.48,6', ''].join('\n')
}

function mzmlDocument(runId: string, arrays: string, startTimeStamp = '2026-11-30T09:00:00Z') {
  return `<?xml version="1.0" encoding="utf-8"?>
<mzML xmlns="http://psi.hupo.org/ms/mzml" version="1.1.0"><run id="r1" startTimeStamp="${startTimeStamp}"><userParam name="instrument" value="ms-1"/><userParam name="runId" value="${runId}"/>
<spectrumList count="1"><spectrum index="0" id="scan=1" defaultArrayLength="2"><binaryDataArrayList count="2">${arrays}</binaryDataArrayList></spectrum></spectrumList></run></mzML>`
}
const mzmlArray = (accession: string, binary: string, zlib: boolean) =>
  `<binaryDataArray encodedLength="0"><cvParam cvRef="MS" accession="MS:1000523" name="64-bit float"/><cvParam cvRef="MS" accession="${zlib ? 'MS:1000574' : 'MS:1000576'}" name="compression"/><cvParam cvRef="MS" accession="${accession}" name="array"/><binary>${binary}</binary></binaryDataArray>`

/** `bytes` zero bytes deflated by zlib as a stream, so this process never holds them. */
async function zlibOfZeros(bytes: number): Promise<Buffer> {
  const deflate = createDeflate({ level: 9 })
  const out: Buffer[] = []
  deflate.on('data', c => out.push(c))
  const done = new Promise(resolve => deflate.on('end', resolve))
  const zeros = Buffer.alloc(1024 * 1024)
  for (let left = bytes; left > 0; left -= zeros.length) {
    if (!deflate.write(left >= zeros.length ? zeros : zeros.subarray(0, left))) await new Promise(r => deflate.once('drain', r))
  }
  deflate.end()
  await done
  return Buffer.concat(out)
}

/** The built server's process (the one listening on the test port), for its peak RSS. */
function serverPeakRssBytes(): number {
  const port = String(testEnv().appPort)
  for (const pid of readdirSync('/proc').filter(d => /^\d+$/.test(d))) {
    try {
      if (!readFileSync(`/proc/${pid}/cmdline`, 'utf8').includes('.output/server/index.mjs')) continue
      if (!readFileSync(`/proc/${pid}/environ`, 'utf8').split('\0').includes(`PORT=${port}`)) continue
      const hwm = /VmHWM:\s*(\d+) kB/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'))
      if (hwm) return Number(hwm[1]) * 1024
    }
    catch { /* a process that ended or is not ours */ }
  }
  throw new Error(`no server process listening on ${port}`)
}

describe('bodies past the cap', () => {
  it('a 40 MB chunked body to the sign-in route is refused with 413 after about 1 MB, not read to the end', async () => {
    const sql = testDb()
    const before = await rowCounts(sql)
    const res = await streamUntilAnswered('/api/console/session', { 'content-type': 'application/json', 'transfer-encoding': 'chunked' },
      { head: Buffer.from('{"email":"a@b.c","password":"'), chunk: Buffer.alloc(64 * 1024, 'x'), totalBytes: 40 * 1024 * 1024 })
    expect(res.status).toBe(413)
    expect(res.headers['content-type']).toBe('application/problem+json')
    expect(res.body.type).toBe('urn:arcwise:problem:payload-too-large')
    // The answer came long before the 40 MB were sent (what was sent when it came includes
    // what the sockets had buffered on both sides).
    expect(res.sentBytes).toBeLessThan(12 * 1024 * 1024)
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a 200 MB chunked JSON acquisition is refused with 413 once it passes the upload cap, not answered 400 at its end', async () => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const res = await streamUntilAnswered('/api/v1/acquisitions', { ...bearer(key.secret), 'content-type': 'application/json', 'transfer-encoding': 'chunked' },
      { head: Buffer.from('{"instrument":"ms-1","runId":"big","acquiredAt":"2026-11-30T09:00:00Z","detectors":[{"unit":"fA","values":['), chunk: Buffer.from('1.5,'.repeat(16 * 1024)), totalBytes: 200 * 1024 * 1024 })
    expect(res.status).toBe(413)
    expect(res.body.type).toBe('urn:arcwise:problem:payload-too-large')
    expect(res.sentBytes).toBeLessThan(UPLOAD_CAP + 12 * 1024 * 1024)
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a chunked CSV and a multipart file part past the upload cap are refused with 413, and the next upload on the hub works', async () => {
    const { key, sql, lab } = await labWithInstrument()
    const before = await rowCounts(sql)
    const rows = Buffer.from('0.4771,8.1\n'.repeat(4096))
    const csv = await streamUntilAnswered('/api/v1/acquisitions', { ...bearer(key.secret), 'content-type': 'text/csv', 'transfer-encoding': 'chunked' },
      { head: Buffer.from(csvWithHeader('big-csv', ['# acceleratingVoltage: 3 kV', 'field [T],detector [fA]'])), chunk: rows, totalBytes: 40 * 1024 * 1024 })
    expect(csv.status).toBe(413)
    const boundary = 'arcwise-test-boundary'
    const head = Buffer.from(`--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="run.csv"\r\nContent-Type: text/csv\r\n\r\n${csvWithHeader('big-mp', ['# acceleratingVoltage: 3 kV', 'field [T],detector [fA]'])}`)
    const multipart = await streamUntilAnswered('/api/v1/acquisitions', { ...bearer(key.secret), 'content-type': `multipart/form-data; boundary=${boundary}`, 'transfer-encoding': 'chunked' },
      { head, chunk: rows, totalBytes: 40 * 1024 * 1024 })
    expect(multipart.status).toBe(413)
    expect(multipart.body.type).toBe('urn:arcwise:problem:payload-too-large')
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
    const ok = await post('/api/v1/acquisitions', JSON.stringify(co2Acquisition(unique('after'), 1500)), { ...bearer(key.secret), 'content-type': 'application/json' })
    expect(ok.status).toBe(201)
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(1)
  })

  it('h3\'s own body reader cannot get past the cap: the token endpoint refuses a 2 MB chunked form with 413', async () => {
    const sql = testDb()
    const before = await rowCounts(sql)
    const res = await streamUntilAnswered('/api/v1/oauth/token', { 'content-type': 'application/x-www-form-urlencoded', 'transfer-encoding': 'chunked' },
      { head: Buffer.from('grant_type=client_credentials&scope='), chunk: Buffer.alloc(64 * 1024, 'a'), totalBytes: 2 * 1024 * 1024 })
    expect(res.status).toBe(413)
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a console route declaring a body over 1 MB is refused with 413 before it is read', async () => {
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const sql = testDb()
    const before = await rowCounts(sql)
    const res = await new Promise<number>((resolve, reject) => {
      const req = httpRequest(url('/api/console/labs'), { method: 'POST', headers: { 'cookie': admin.cookie, 'content-type': 'application/json', 'content-length': String(2 * 1024 * 1024) } }, r => resolve(r.statusCode ?? 0))
      req.on('error', reject)
      req.write('{"slug":"')
    })
    expect(res).toBe(413)
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a multipart upload with a part other than "file" is refused naming that part', async () => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const form = new FormData()
    form.append('file', new Blob([csvWithHeader(unique('mp'), ['# acceleratingVoltage: 3 kV', 'field [T],detector [fA]'])], { type: 'text/csv' }), 'run.csv')
    form.append('instrument', 'ms-1')
    const res = await post('/api/v1/acquisitions', form, bearer(key.secret))
    expect(res.status).toBe(422)
    expect(paths(res.body)).toEqual(['instrument'])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })
})

describe('text built to backtrack', () => {
  // The shapes that held the event loop: a header cell "(" + spaces + a letter (cubic in the
  // old unit pattern: 34 s at 4,000 spaces), a metadata key with a long run of spaces inside,
  // and a setting whose number runs into a long string of "e" (both quadratic).
  const spaces = ' '.repeat(50_000)
  it.each([
    ['a header cell of "(", 50,000 spaces and a letter', ['# acceleratingVoltage: 3 kV', `field (${spaces}a,detector [fA]`], 'csv.header.0'],
    ['a header cell of "x [", 50,000 spaces and no closing bracket', ['# acceleratingVoltage: 3 kV', `field [${spaces}(${spaces}a,detector [fA]`], 'csv.header.0'],
    ['a metadata key of "a", 50,000 spaces and "b"', [`#a${spaces}b: 1`, '# acceleratingVoltage: 3 kV', 'field [T],detector [fA]'], 'csv.meta.a'],
    ['a setting of "1" and 50,000 "e"', [`# acceleratingVoltage: 1${'e'.repeat(50_000)}!`, 'field [T],detector [fA]'], 'settings.acceleratingVoltage'],
  ])('a CSV with %s is answered within a second with a problem naming the field', async (_what, lines, path) => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const started = performance.now()
    const res = await post('/api/v1/acquisitions', csvWithHeader(unique('redos'), lines), { ...bearer(key.secret), 'content-type': 'text/csv' })
    const ms = performance.now() - started
    expect(res.status).toBe(422)
    expect(paths(res.body)[0]!.trimEnd()).toBe(path)
    expect(ms).toBeLessThan(1000)
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })
})

describe('compressed bombs', () => {
  it('an mzML array of 522 KB that inflates to 512 MiB is refused with 413 naming the array, and the server\'s peak memory stays far below it', async () => {
    const { key, sql } = await labWithInstrument()
    const bomb = (await zlibOfZeros(512 * 1024 * 1024)).toString('base64')
    const small = Buffer.from(new Float64Array([44, 45]).buffer).toString('base64')
    const peakBefore = serverPeakRssBytes()
    const before = await rowCounts(sql)
    const res = await post('/api/v1/acquisitions', mzmlDocument(unique('bomb'), mzmlArray('MS:1000514', bomb, true) + mzmlArray('MS:1000515', small, false)),
      { ...bearer(key.secret), 'content-type': 'application/mzml+xml' })
    expect(res.status).toBe(413)
    expect(res.type).toBe('application/problem+json')
    expect(paths(res.body)).toEqual(['mzml.spectrum.binaryDataArray.0'])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
    // At most one array's worth (2,000,000 float64 = 16 MB) is ever inflated.
    expect(serverPeakRssBytes() - peakBefore).toBeLessThan(200 * 1024 * 1024)
  })

  it('an mzML array that is not zlib data is refused with 422 naming it', async () => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const res = await post('/api/v1/acquisitions', mzmlDocument(unique('badz'), mzmlArray('MS:1000514', Buffer.from('not zlib at all').toString('base64'), true) + mzmlArray('MS:1000515', 'AAAA', false)),
      { ...bearer(key.secret), 'content-type': 'application/mzml+xml' })
    expect(res.status).toBe(422)
    expect(paths(res.body)).toEqual(['mzml.spectrum.binaryDataArray.0'])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })
})

describe('unknown and prototype names', () => {
  const radius = '{"value":27,"unit":"cm","u":0.01}'
  it.each([
    ['a typo of u ("uncertainty") in a geometry value', `{"kind":"potential-sector","analyzerRadius":{"value":27,"unit":"cm","uncertainty":0.01}}`, 'geometry.analyzerRadius.uncertainty'],
    ['__proto__ in a geometry value', `{"kind":"potential-sector","analyzerRadius":{"value":27,"unit":"cm","__proto__":{"u":5}}}`, 'geometry.analyzerRadius.__proto__'],
    ['constructor in a geometry', `{"kind":"potential-sector","analyzerRadius":${radius},"constructor":1}`, 'geometry.constructor'],
    ['prototype in a collector', `{"kind":"multi-collector","collectors":[{"id":"C","effectiveRadius":${radius},"prototype":{}}]}`, 'geometry.collectors.0.prototype'],
  ])('an instrument registration with %s is refused with 422 naming it, and nothing is stored', async (_what, geometry, path) => {
    const { admin, lab, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const res = await admin.request('POST', `/api/console/labs/${lab.id}/instruments`, `{"slug":"ms-2","name":"Sector two","geometry":${geometry}}`)
    expect(res.status).toBe(422)
    expect(paths(res.body)).toEqual([path])
    const version = await admin.request('POST', `/api/console/labs/${lab.id}/instruments/${(await sql`select id from instruments where lab_id = ${lab.id}`)[0]!.id}/geometry-versions`,
      `{"geometry":${geometry},"validFrom":"2026-06-01T00:00:00Z"}`)
    expect(version.status).toBe(422)
    expect(paths(version.body)).toEqual([path])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it.each([
    ['__proto__', '"__proto__":{"value":1,"unit":"T"}'],
    ['constructor', '"constructor":{"value":1,"unit":"T"}'],
    ['prototype', '"prototype":{"value":1,"unit":"T"}'],
    ['acceleratingVoltag (a typo)', '"acceleratingVoltag":{"value":3,"unit":"kV"}'],
  ])('an acquisition whose settings hold %s is refused with 422 naming it', async (name, extra) => {
    const { key, sql } = await labWithInstrument()
    const body = JSON.stringify(co2Acquisition(unique('proto'), 1500)).replace('"settings":{', `"settings":{${extra},`)
    const before = await rowCounts(sql)
    const res = await post('/api/v1/acquisitions', body, { ...bearer(key.secret), 'content-type': 'application/json' })
    expect(res.status).toBe(422)
    expect(paths(res.body)).toEqual([`settings.${name.split(' ')[0]}`])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a detector or sweep unit named "constructor" is an unknown unit, not Object\'s constructor', async () => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const detector = co2Acquisition(unique('ctor'), 1500)
    detector.detectors[0]!.unit = 'constructor'
    const sweep = co2Acquisition(unique('ctor'), 1500)
    sweep.sweep.unit = 'constructor'
    for (const [body, path] of [[detector, 'detectors.0.unit'], [sweep, 'sweep.unit']] as const) {
      const res = await post('/api/v1/acquisitions', JSON.stringify(body), { ...bearer(key.secret), 'content-type': 'application/json' })
      expect(res.status).toBe(422)
      expect(paths(res.body).map(p => p.replace(/\[(\d+)\]/g, '.$1'))).toEqual([path])
      expect(JSON.stringify(res.body)).not.toContain('function')
    }
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it.each([
    ['constructor', '# constructor: 3 kV', 'csv.meta.constructor'],
    ['__proto__', '# __proto__: 3 kV', 'csv.meta.__proto__'],
    ['an unknown key', '# operator: A. Person', 'csv.meta.operator'],
    ['a setting given twice', '# acceleratingVoltage: 3.1 kV', 'csv.meta.acceleratingVoltage'],
  ])('a CSV with a %s line gets a clean problem naming it', async (_what, line, path) => {
    const { key, sql } = await labWithInstrument()
    const before = await rowCounts(sql)
    const res = await post('/api/v1/acquisitions', csvWithHeader(unique('ctor'), ['# acceleratingVoltage: 3 kV', line, 'field [T],detector [fA]']), { ...bearer(key.secret), 'content-type': 'text/csv' })
    expect(res.status).toBe(422)
    expect(paths(res.body)).toEqual([path])
    expect(JSON.stringify(res.body)).not.toContain('function')
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })
})

describe('run times in the future', () => {
  const ahead = (minutes: number) => new Date(Date.now() + minutes * 60_000).toISOString()
  const century = '2126-11-30T09:00:00Z'

  it('an acquisition dated a century ahead is refused with 422 naming acquiredAt, as JSON, CSV, mzML and a console upload', async () => {
    const { key, sql, lab } = await labWithInstrument()
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const before = await rowCounts(sql)
    const json = await post('/api/v1/acquisitions', JSON.stringify({ ...co2Acquisition(unique('future'), 1500), acquiredAt: century }), { ...bearer(key.secret), 'content-type': 'application/json' })
    const csvText = csvWithHeader(unique('future'), ['# acceleratingVoltage: 3 kV', 'field [T],detector [fA]']).replace('2026-11-30T09:00:00Z', century)
    const csv = await post('/api/v1/acquisitions', csvText, { ...bearer(key.secret), 'content-type': 'text/csv' })
    const f64 = (a: number[]) => Buffer.from(new Float64Array(a).buffer).toString('base64')
    const mzml = await post('/api/v1/acquisitions', mzmlDocument(unique('future'), mzmlArray('MS:1000514', f64([44, 45]), false) + mzmlArray('MS:1000515', f64([1, 2]), false), century),
      { ...bearer(key.secret), 'content-type': 'application/mzml+xml' })
    const form = new FormData()
    form.append('file', new Blob([csvText], { type: 'text/csv' }), 'run.csv')
    const consoleUpload = await post(`/api/console/labs/${lab.id}/acquisitions`, form, { cookie: admin.cookie })
    for (const res of [json, csv, mzml, consoleUpload]) {
      expect(res.status).toBe(422)
      expect(paths(res.body)).toEqual(['acquiredAt'])
    }
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })

  it('a clock a few minutes fast is allowed within the 5-minute skew; ten minutes is not', async () => {
    const { key, sql, lab } = await labWithInstrument()
    const fast = await post('/api/v1/acquisitions', JSON.stringify({ ...co2Acquisition(unique('fast'), 1500), acquiredAt: ahead(4) }), { ...bearer(key.secret), 'content-type': 'application/json' })
    expect(fast.status).toBe(201)
    const tooFast = await post('/api/v1/acquisitions', JSON.stringify({ ...co2Acquisition(unique('fast'), 1500), acquiredAt: ahead(10) }), { ...bearer(key.secret), 'content-type': 'application/json' })
    expect(tooFast.status).toBe(422)
    expect(paths(tooFast.body)).toEqual(['acquiredAt'])
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(1)
  })
})
