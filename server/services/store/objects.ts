import { createHash } from 'node:crypto'
import { Readable } from 'node:stream'
import { DeleteObjectCommand, GetObjectCommand, HeadBucketCommand, HeadObjectCommand } from '@aws-sdk/client-s3'
import { Upload } from '@aws-sdk/lib-storage'
import { sql } from 'drizzle-orm'
import { storeObjects } from '../../database/schema'
import { observeStoreCall } from '../metrics'
import { claimList, freshKeys, type KeyClaim } from './claimPlan'
import { storeClient } from './client'
import { LEAN_PUT_MAX_BYTES, leanPut, leanPutAvailable } from './leanPut'

// Objects are addressed by the SHA-256 of their content: `raw/<sha256>` (the body as the lab
// sent it) and `arrays/<sha256>` (the parsed body, arrays as float64: ./arrays.ts). The same
// content is stored once, whoever sends it; PostgreSQL keeps the hash and byte size.
//
// Deletion (retention, ./retention.ts) must never remove an object that an acquisition being
// accepted right now is about to reference. So a writer first *claims* the key in
// store_objects (claimed_at = now(), committed at once), then checks and writes the object,
// then commits its own row; retention deletes only keys whose claim is older than a grace
// period and that no live row references, under the claim row's lock. A writer whose claim
// waits on that lock finds the row gone afterwards, inserts it again and writes the object.

export type ObjectKind = 'raw' | 'arrays'
export interface StoredObject { sha256: string, bytes: number }

export const objectKey = (kind: ObjectKind, sha256: string) => `${kind}/${sha256}`

export function sha256Of(data: Buffer): string {
  return createHash('sha256').update(data).digest('hex')
}

/**
 * The store did not answer or refused: 503 naming it. Writing, nothing is kept; reading, the
 * raw data is unavailable for now (the rows and results in PostgreSQL are not).
 */
export function storeUnavailable(error: unknown, doing: 'write' | 'read' = 'write') {
  const why = error instanceof Error ? (error.name && error.name !== 'Error' ? `${error.name}: ` : '') + error.message.split('\n')[0] : 'no answer'
  const then = doing === 'write' ? 'Nothing was stored; send it again later.' : 'The raw data is temporarily unavailable; try again later.'
  return problem(503, 'store-unavailable', `The object store is not available (${why.slice(0, 200)}). ${then}`, { headers: { 'retry-after': '5' } })
}

/** The error is storeUnavailable's 503 (the store, not the request, is at fault). */
export function isStoreUnavailable(error: unknown): boolean {
  const data = (error as { data?: { problem?: { type?: string } } }).data
  return data?.problem?.type === problemType('store-unavailable')
}

const notFound = (error: unknown) => {
  const e = error as { name?: string, $metadata?: { httpStatusCode?: number } }
  return e.name === 'NotFound' || e.name === 'NoSuchKey' || e.$metadata?.httpStatusCode === 404
}

/** Times one store call for /metrics (arcwise_store_call_duration_seconds{op,outcome}). */
async function timed<T>(op: string, call: () => Promise<T>): Promise<T> {
  const started = performance.now()
  try {
    const value = await call()
    observeStoreCall(op, 'ok', (performance.now() - started) / 1000)
    return value
  }
  catch (error) {
    observeStoreCall(op, notFound(error) ? 'not-found' : 'error', (performance.now() - started) / 1000)
    throw error
  }
}

/**
 * Claims keys before writing them (see above); committed on its own. Returns the keys this
 * call's claim inserted (rather than found claimed already): `xmax = 0` marks a row version
 * that the INSERT wrote, not the ON CONFLICT update (PostgreSQL's system column; common
 * practice, no source beyond the manual's 5.6 System Columns).
 *
 * The claims of one turn of the event loop go to PostgreSQL as one statement (batchPerTurn, as
 * the accepted write is grouped): under load one commit, not one per acquisition. Keys are
 * sent once each and in order, and a key that several acquisitions of the turn claim is fresh
 * for the first of them only (./claimPlan.ts).
 */
export async function claimObjects(objects: KeyClaim[]): Promise<Set<string>> {
  if (!objects.length) return new Set()
  return claimTurn(objects)
}

const claimTurn = batchPerTurn<KeyClaim[], Set<string>>(async (requests) => {
  const rows = await useDb().execute<{ key: string, inserted: boolean }>(sql`
    insert into ${storeObjects} (key, bytes, claimed_at)
    select key, bytes, now() from jsonb_to_recordset(${JSON.stringify(claimList(requests))}::jsonb) as t(key text, bytes bigint)
    on conflict (key) do update set claimed_at = now()
    returning key, (xmax = 0) as inserted`)
  return freshKeys(requests, rows.filter(r => r.inserted).map(r => r.key)).map(value => ({ value }))
})

/** The object's size, or null when there is none. */
export async function headObject(kind: ObjectKind, sha256: string): Promise<number | null> {
  const { s3, bucket } = storeClient()
  try {
    const head = await timed('head', () => s3.send(new HeadObjectCommand({ Bucket: bucket, Key: objectKey(kind, sha256) })))
    return head.ContentLength ?? 0
  }
  catch (error) {
    if (notFound(error)) return null
    throw storeUnavailable(error)
  }
}

/**
 * Stores `data` under its hash unless an object of that hash is there already (deduplication):
 * up to 5 MB in one lean signed PUT (./leanPut.ts), larger streamed through lib-storage's
 * Upload (multipart). The caller
 * has claimed the key (claimObjects). `claimedFresh`: the caller's claim inserted the key's
 * row, so no object of that key can be there (below) and the HEAD is skipped. Fails with 503
 * when the store does not answer.
 *
 * Why a fresh claim needs no HEAD: an object is written only after its key's claim commits,
 * and retention deletes the object before the claim row (in one transaction, under the row's
 * lock). So a key without a row has no object, except after a crash between those steps or
 * the loss of a claim in a crash of PostgreSQL; then the PUT writes the same bytes under the
 * same content address again, which no reader can tell apart.
 */
export async function putObject(kind: ObjectKind, data: Buffer, contentType: string, sha256 = sha256Of(data), claimedFresh = false): Promise<StoredObject & { written: boolean }> {
  if (!claimedFresh) {
    const existing = await headObject(kind, sha256)
    if (existing === data.length) return { sha256, bytes: data.length, written: false }
  }
  const { s3, bucket } = storeClient()
  try {
    // Small objects (every acquisition's two) skip the SDK's per-request middleware: ./leanPut.ts.
    if (data.length <= LEAN_PUT_MAX_BYTES && await leanPutAvailable(s3, bucket)) {
      await timed('put', () => leanPut(s3, bucket, objectKey(kind, sha256), data, sha256, contentType, { sha256 }))
      return { sha256, bytes: data.length, written: true }
    }
    const chunk = 1024 * 1024
    const body = Readable.from((function* () { for (let at = 0; at < data.length; at += chunk) yield data.subarray(at, at + chunk) })())
    await timed('put', () => new Upload({
      client: s3,
      params: { Bucket: bucket, Key: objectKey(kind, sha256), Body: body, ContentType: contentType, Metadata: { sha256 } },
      queueSize: 2,
    }).done())
  }
  catch (error) { throw storeUnavailable(error) }
  return { sha256, bytes: data.length, written: true }
}

/** The object as a stream (the caller pipes it out); `range` as in HTTP, e.g. "bytes=0-5999". */
export async function getObjectStream(kind: ObjectKind, sha256: string, range?: string): Promise<Readable> {
  const { s3, bucket } = storeClient()
  try {
    const got = await timed('get', () => s3.send(new GetObjectCommand({ Bucket: bucket, Key: objectKey(kind, sha256), ...(range ? { Range: range } : {}) })))
    return got.Body as Readable
  }
  catch (error) {
    if (notFound(error)) throw problem(410, 'raw-data-missing', `The stored ${kind === 'raw' ? 'body' : 'arrays'} of this acquisition are not in the object store.`)
    throw storeUnavailable(error, 'read')
  }
}

/** The whole object in memory (or its `range`). */
export async function getObjectBytes(kind: ObjectKind, sha256: string, range?: string): Promise<Buffer> {
  const stream = await getObjectStream(kind, sha256, range)
  const chunks: Buffer[] = []
  try { for await (const c of stream) chunks.push(c as Buffer) }
  catch (error) { throw storeUnavailable(error, 'read') }
  return Buffer.concat(chunks)
}

export async function deleteObject(kind: ObjectKind, sha256: string) {
  const { s3, bucket } = storeClient()
  try { await timed('delete', () => s3.send(new DeleteObjectCommand({ Bucket: bucket, Key: objectKey(kind, sha256) }))) }
  catch (error) { throw storeUnavailable(error) }
}

/** Readiness: the bucket answers. Throws with the reason. */
export async function checkStore(): Promise<void> {
  const { s3, bucket } = storeClient()
  await timed('head-bucket', () => s3.send(new HeadBucketCommand({ Bucket: bucket })))
}
