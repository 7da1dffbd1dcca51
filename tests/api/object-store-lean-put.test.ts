import { createHash } from 'node:crypto'
import { mkdtempSync, rmSync } from 'node:fs'
import { createServer, request, type IncomingHttpHeaders, type Server } from 'node:http'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { S3Client } from '@aws-sdk/client-s3'
import { SignatureV4 } from '@smithy/signature-v4'
import { afterAll, describe, expect, it } from 'vitest'
import { decodeArrays } from '../../server/services/store/arrays'
import { startStoreFake, storeEnv, type StoreFake } from '../../scripts/lib/store-fake'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, useArcwise } from '../support/server'
import { testStore } from '../support/store'

// The lean PUT (server/services/store/leanPut.ts): an acquisition's small objects are signed
// by the server itself (Signature Version 4) and sent over undici, not through the SDK. This
// file's server talks to an s3rver of its own through a recording proxy in front of it, so
// the test sees each request as the store receives it, and can make the store refuse,
// fail or vanish. s3rver 3.7 does not verify Signature Version 4 (its authentication
// middleware says "unimplemented") nor the payload's hash, so the test checks each PUT's
// signature itself with the SDK's own signer (@smithy/signature-v4) and the store's credentials.
const STORE_PORT = 4578
const PROXY_PORT = 4579
const directory = mkdtempSync(join(tmpdir(), 'arcwise-lean-put-'))
const fake: StoreFake = await startStoreFake({ port: STORE_PORT, directory })

interface Seen { method: string, path: string, headers: IncomingHttpHeaders, bodySha256: string, bytes: number }
const seen: Seen[] = []
/** What the proxy does to the next PUTs, one entry a PUT; empty: pass them on. */
const faults: ('fail-500' | 'refuse-403')[] = []
const sha256 = (data: Buffer | string) => createHash('sha256').update(data).digest('hex')

function startProxy(): Promise<Server> {
  const server = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', (c: Buffer) => chunks.push(c))
    req.on('end', () => {
      const body = Buffer.concat(chunks)
      seen.push({ method: req.method!, path: req.url!, headers: req.headers, bodySha256: sha256(body), bytes: body.length })
      const fault = req.method === 'PUT' ? faults.shift() : undefined
      // The answers of AWS S3 to a failure of its own and to a request whose signature it refuses.
      if (fault === 'fail-500') {
        res.writeHead(500, { 'content-type': 'application/xml' })
        return res.end('<?xml version="1.0" encoding="UTF-8"?><Error><Code>InternalError</Code><Message>We encountered an internal error. Please try again.</Message></Error>')
      }
      if (fault === 'refuse-403') {
        res.writeHead(403, { 'content-type': 'application/xml' })
        return res.end('<?xml version="1.0" encoding="UTF-8"?><Error><Code>SignatureDoesNotMatch</Code><Message>The request signature we calculated does not match the signature you provided.</Message></Error>')
      }
      const upstream = request({ host: '127.0.0.1', port: STORE_PORT, method: req.method, path: req.url, headers: req.headers }, (up) => {
        res.writeHead(up.statusCode!, up.headers)
        up.pipe(res)
      })
      upstream.on('error', () => res.destroy())
      upstream.end(body)
    })
  })
  return new Promise(resolve => server.listen(PROXY_PORT, '127.0.0.1', () => resolve(server)))
}
let proxy: Server | undefined = await startProxy()
const stopProxy = async () => {
  const p = proxy
  proxy = undefined
  if (!p) return
  const closed = new Promise(resolve => p.close(resolve))
  p.closeAllConnections()
  await closed
}
afterAll(async () => { await stopProxy(); await fake.close(); rmSync(directory, { recursive: true, force: true }) })

const env = storeEnv(PROXY_PORT)
await useArcwise({ env })
// Read straight from s3rver, past the proxy.
const store = testStore({ ...env, NUXT_STORE_ENDPOINT: `http://127.0.0.1:${STORE_PORT}` })

/** The Authorization header the SDK's signer gives the request as received, over the headers it says it signed. */
async function sdkSignature(put: Seen): Promise<string> {
  const signedNames = /SignedHeaders=([^,]+),/.exec(put.headers.authorization!)![1]!.split(';')
  const headers = Object.fromEntries(signedNames.map(n => [n, String(put.headers[n])]))
  const stamp = put.headers['x-amz-date'] as string
  const signingDate = new Date(`${stamp.slice(0, 4)}-${stamp.slice(4, 6)}-${stamp.slice(6, 8)}T${stamp.slice(9, 11)}:${stamp.slice(11, 13)}:${stamp.slice(13, 15)}Z`)
  const signer = new SignatureV4({
    credentials: { accessKeyId: env.NUXT_STORE_ACCESS_KEY_ID!, secretAccessKey: env.NUXT_STORE_SECRET_ACCESS_KEY! },
    region: env.NUXT_STORE_REGION!, service: 's3', sha256: new S3Client({ region: 'us-east-1' }).config.sha256, uriEscapePath: false,
  })
  const signed = await signer.sign({ method: put.method, protocol: 'http:', hostname: '127.0.0.1', port: PROXY_PORT, path: put.path, query: {}, headers }, { signingDate })
  return signed.headers.authorization!
}

const post = (secret: string, body: unknown) => new ConsoleClient().request('POST', '/api/v1/acquisitions', body, bearer(secret))
const putsSince = (from: number) => seen.slice(from).filter(s => s.method === 'PUT')

describe('the lean PUT of an acquisition\'s objects', () => {
  it('puts the right bytes at their SHA-256 key, signed by the server with that SHA-256 as the payload hash and checksum', async () => {
    const { key, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const sent = JSON.stringify(body)
    const from = seen.length
    const res = await post(key.secret, sent)
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    const row = (await sql`select raw_sha256, arrays_sha256, arrays_bytes::int from acquisitions where id = ${res.body.id}`)[0]!
    expect(row.raw_sha256).toBe(sha256(sent))
    // Two PUTs and nothing else for these keys (fresh claims: no HEAD), each at the key its body hashes to.
    const keys = [`/arcwise-raw/arrays/${row.arrays_sha256}`, `/arcwise-raw/raw/${row.raw_sha256}`]
    expect(seen.slice(from).filter(s => keys.includes(s.path)).map(s => `${s.method} ${s.path}`).sort()).toEqual(keys.map(k => `PUT ${k}`))
    const puts = putsSince(from).filter(s => keys.includes(s.path))
    for (const put of puts) {
      const keySha = put.path.split('/').pop()!
      expect(put.bodySha256).toBe(keySha)
      expect(put.headers['x-amz-content-sha256']).toBe(keySha)
      expect(put.headers['x-amz-checksum-sha256']).toBe(Buffer.from(keySha, 'hex').toString('base64'))
      expect(put.headers['x-amz-meta-sha256']).toBe(keySha)
      expect(Number(put.headers['content-length'])).toBe(put.bytes)
      const signedHeaders = /SignedHeaders=([^,]+),/.exec(put.headers.authorization!)![1]!.split(';')
      expect(signedHeaders).toEqual(expect.arrayContaining(['host', 'x-amz-content-sha256', 'x-amz-checksum-sha256', 'x-amz-date', 'content-type']))
      expect(put.headers.authorization).toMatch(/^AWS4-HMAC-SHA256 Credential=S3RVER\/\d{8}\/us-east-1\/s3\/aws4_request, /)
      expect(put.headers.authorization).toBe(await sdkSignature(put))
    }
    const rawPut = puts.find(p => p.path.includes('/raw/'))!
    expect(rawPut.headers['content-type']).toBe('application/json')
    // What s3rver kept: the body byte for byte, and arrays that decode to the body's numbers.
    expect((await store.bytes(`raw/${row.raw_sha256}`)).equals(Buffer.from(sent))).toBe(true)
    const arrays = await store.bytes(`arrays/${row.arrays_sha256}`)
    expect(sha256(arrays)).toBe(row.arrays_sha256)
    expect(arrays.length).toBe(row.arrays_bytes)
    expect(decodeArrays<typeof body>(arrays).detectors[0]!.values).toEqual(body.detectors[0]!.values)
  })

  it('takes the same bytes from several labs at the same moment: every one accepted, one object a key, readable', async () => {
    const labs = await Promise.all(Array.from({ length: 6 }, () => labWithInstrument()))
    const sent = JSON.stringify(co2Acquisition())
    const answers = await Promise.all(labs.map(l => post(l.key.secret, sent)))
    expect(answers.map(a => a.status)).toEqual(labs.map(() => 201))
    const rows = await labs[0]!.sql`select distinct raw_sha256, arrays_sha256 from acquisitions where id in ${labs[0]!.sql(answers.map(a => a.body.id as string))}`
    expect(rows).toHaveLength(1)
    expect((await store.bytes(`raw/${rows[0]!.raw_sha256}`)).toString('utf8')).toBe(sent)
    expect(sha256(await store.bytes(`arrays/${rows[0]!.arrays_sha256}`))).toBe(rows[0]!.arrays_sha256)
    expect(await store.keys(`raw/${rows[0]!.raw_sha256}`)).toHaveLength(1)
  })

  it('answers 503 naming the store\'s reason when the store refuses the request, tries no second time, and stores nothing', async () => {
    const { key, lab, sql } = await labWithInstrument()
    const body = co2Acquisition()
    const from = seen.length
    faults.push('refuse-403', 'refuse-403')
    const res = await post(key.secret, body)
    faults.length = 0
    // A refusal is not retried: one PUT of each object (a retry would follow within 100 ms).
    await expect.poll(() => putsSince(from).length).toBe(2)
    await new Promise(resolve => setTimeout(resolve, 300))
    expect(putsSince(from)).toHaveLength(2)
    expect(res.status).toBe(503)
    expect(res.headers.get('retry-after')).toBe('5')
    expect(res.body).toMatchObject({ status: 503, type: 'urn:arcwise:problem:store-unavailable' })
    expect(res.body.detail).toMatch(/SignatureDoesNotMatch/)
    const n = (await sql`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`)[0]!
    expect(n.n).toBe(0)
  })

  it('tries a PUT the store failed with a 5xx once more, as the SDK client would; failed twice, 503', async () => {
    const { key, lab, sql } = await labWithInstrument()
    let from = seen.length
    faults.push('fail-500')
    const once = await post(key.secret, co2Acquisition())
    expect(once.status, JSON.stringify(once.body).slice(0, 300)).toBe(201)
    // Three PUTs reached the proxy: one failed, then both objects.
    expect(putsSince(from)).toHaveLength(3)
    from = seen.length
    faults.push('fail-500', 'fail-500', 'fail-500', 'fail-500')
    const twice = await post(key.secret, co2Acquisition())
    faults.length = 0
    expect(twice.status).toBe(503)
    expect(twice.body.detail).toMatch(/^The object store is not available \(InternalError: We encountered an internal error/)
    // Each object tried twice (the second may still be on its way when the first's failure answers).
    await expect.poll(() => putsSince(from).length).toBe(4)
    const n = (await sql`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`)[0]!
    expect(n.n).toBe(1)
  })

  it('answers 503 with Retry-After when the store is down, stores nothing, and stores again once it is back', async () => {
    const { key, lab, sql } = await labWithInstrument()
    await stopProxy()
    const body = co2Acquisition()
    const refused = await post(key.secret, body)
    expect(refused.status).toBe(503)
    expect(refused.headers.get('retry-after')).toBe('5')
    expect(refused.body).toMatchObject({ type: 'urn:arcwise:problem:store-unavailable' })
    expect(refused.body.detail).toMatch(/ECONNREFUSED.*Nothing was stored/)
    const none = (await sql`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`)[0]!
    expect(none.n).toBe(0)
    proxy = await startProxy()
    const again = await post(key.secret, body)
    expect(again.status, JSON.stringify(again.body).slice(0, 300)).toBe(201)
    const row = (await sql`select raw_sha256 from acquisitions where id = ${again.body.id}`)[0]!
    expect(sha256(await store.bytes(`raw/${row.raw_sha256}`))).toBe(row.raw_sha256)
  })
})
