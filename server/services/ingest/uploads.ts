import type { Readable } from 'node:stream'
import Busboy from 'busboy'
import { and, eq, sql } from 'drizzle-orm'
import { acquisitionInput, type AcquisitionInput } from '#shared/schemas/acquisitions'
import type { ProblemDocument } from '#shared/schemas/common'
import { acquisitions, uploads } from '../../database/schema'
import { fileKindOf, parseCsvUpload, type FileKind, type QueryMeta } from './fileFormats'
import { parseJcampUpload } from './jcamp'
import { parseMzmlUpload } from './mzml'
import type { LabKey } from '../access'
import { acceptAcquisition, bodyHash, canonicalBody } from './accept'
import { loadPayload, storeEnabled, storePayload, type ReceivedBody } from '../store'

// An acquisition body arrives as JSON or as a file (CSV, JCAMP-DX, mzML; raw body or the
// one multipart part "file", streamed through busboy). Bodies of more than INLINE_POINTS
// points are stored and processed in the background: the caller gets 202 and a status URL.
// Every byte is read through the request's counter (server/utils/requestBody.ts), capped at
// the configured upload limit (runtimeConfig.ingest.maxUploadBytes); a multipart part has
// the same cap, and the parts around it small ones.

export const INLINE_POINTS = 250_000

const parsers: Record<FileKind, (stream: Readable, query: QueryMeta) => Promise<Record<string, unknown>>> = {
  csv: parseCsvUpload, jcamp: parseJcampUpload, mzml: parseMzmlUpload,
}

function validAcquisition(value: unknown): AcquisitionInput {
  const input = parseOrProblem(acquisitionInput, value, 'body')
  assertPlausibleTime(input)
  return input
}

/**
 * An instrument cannot have acquired a run in the future: acquiredAt later than the server's
 * clock plus the configured skew (runtimeConfig.ingest.clockSkewSeconds) is refused.
 */
export function assertPlausibleTime(input: Pick<AcquisitionInput, 'acquiredAt'>) {
  const skewMs = Number(useRuntimeConfig().ingest.clockSkewSeconds) * 1000
  const latest = Date.now() + skewMs
  if (Date.parse(input.acquiredAt) > latest) {
    throw fieldProblem('acquiredAt', `is later than the hub's clock allows (${new Date(latest).toISOString()}, ${skewMs / 1000} s of clock skew)`)
  }
}

/**
 * What ingest needs of a request body: its Content-Type, the metadata the query string gives
 * beside a file, the body as a capped stream, and the body read as JSON and validated
 * (server/utils/acquisitionBody.ts makes these from the request).
 */
export interface AcquisitionBodySource {
  contentType: string
  meta: QueryMeta
  stream: () => Readable
  json: () => Promise<AcquisitionInput>
}

/** The acquisition body, whatever form it came in. */
export async function acquisitionFromBody(source: AcquisitionBodySource): Promise<AcquisitionInput> {
  const { contentType } = source
  if (contentType.toLowerCase().startsWith('multipart/form-data')) return readMultipartAcquisition(source)
  const kind = fileKindOf(contentType)
  if (!kind) throw problem(415, 'unsupported-media-type', `Content-Type ${contentType.slice(0, 100)} is not taken here: send application/json, text/csv, chemical/x-jcamp-dx, application/mzml+xml or multipart/form-data.`)
  if (kind === 'json') {
    const body = await source.json()
    assertPlausibleTime(body)
    return body
  }
  return validAcquisition(await parsers[kind](source.stream(), source.meta))
}

/**
 * A multipart upload: one part named "file", parsed as it streams. Any other part is refused
 * by name (nothing sent is dropped unread); metadata goes in the query string.
 */
async function readMultipartAcquisition({ contentType, meta, stream }: AcquisitionBodySource): Promise<AcquisitionInput> {
  const cap = uploadLimitBytes()
  let form: Busboy.Busboy
  try { form = Busboy({ headers: { 'content-type': contentType }, limits: { files: 1, fileSize: cap, fields: 8, fieldSize: 4096, parts: 9, headerPairs: 16 } }) }
  catch (error) { throw problem(400, 'malformed-multipart', `The multipart body cannot be read: ${(error as Error).message}`) }
  const body = stream()
  let failure: Error | undefined
  const fail = (error: Error) => { failure ??= error; form.destroy(failure) }
  body.on('error', fail)
  form.on('error', (error: Error) => { failure ??= (error as { statusCode?: number }).statusCode ? error : problem(400, 'malformed-multipart', `The multipart body cannot be read: ${error.message}`) })
  form.on('field', name => fail(fieldProblem(name.slice(0, 64) || '(part)', 'is not taken: send the file as the part "file" and metadata in the query string')))
  form.on('filesLimit', () => fail(fieldProblem('file', 'send one file per upload')))
  form.on('partsLimit', () => fail(problem(413, 'payload-too-large', 'The multipart body has too many parts.')))
  const closed = new Promise<void>((resolve, reject) => {
    form.on('close', () => failure ? reject(failure) : resolve())
    form.on('error', () => reject(failure))
  })
  closed.catch(() => {})
  const file = await new Promise<{ stream: Readable, info: Busboy.FileInfo } | undefined>((resolve, reject) => {
    form.on('file', (name, stream, info) => {
      if (name !== 'file') { stream.resume(); fail(fieldProblem(name.slice(0, 64) || '(part)', 'is not taken: send the file as the part "file"')); return }
      stream.on('limit', () => stream.destroy(bodyTooLarge(cap)))
      resolve({ stream, info })
    })
    closed.then(() => resolve(undefined), reject)
    body.pipe(form)
  })
  if (!file) throw failure ?? fieldProblem('file', 'a multipart upload needs a part named "file"')
  const kind = fileKindOf(file.info.mimeType ?? '') ?? kindByName(file.info.filename)
  let value: unknown
  try { value = !kind || kind === 'json' ? jsonPart(await readStreamBytes(file.stream)) : await parsers[kind](file.stream, meta) }
  // The part's stream fails with busboy's own error when the form breaks: answer the form's problem.
  catch (error) { throw failure ?? error }
  // A parser that stopped before the end of its part has refused it already; one that read
  // it whole waits for the parts after it, so an unexpected one is refused, not dropped.
  await closed
  return validAcquisition(value)
}

function jsonPart(data: Buffer): unknown {
  try { return JSON.parse(data.toString('utf8')) }
  catch (error) { throw fieldProblem('file', `is neither CSV, JCAMP-DX nor mzML by its type or name, and not JSON: ${(error as Error).message}`, 400, 'malformed-json') }
}

function kindByName(filename?: string): FileKind | undefined {
  const ext = filename?.split('.').pop()?.toLowerCase()
  return ext === 'csv' ? 'csv' : ext === 'jdx' || ext === 'dx' || ext === 'jcamp' ? 'jcamp' : ext === 'mzml' ? 'mzml' : undefined
}

export function pointCount(input: AcquisitionInput): number {
  return input.sweep?.values.length ?? input.mzSpectrum?.mz.length ?? Math.max(0, ...input.detectors.map(d => d.values.length))
}

/** Stores a large body for background processing; answered with 202. */
export async function deferAcquisition(key: LabKey, input: AcquisitionInput, schemaId: string, received?: ReceivedBody) {
  // The body goes in as the text already made for its hash, not serialised a second time; with
  // the object store on, it goes there (as received, and parsed) before the row commits.
  const { json, hash } = canonicalBody(input)
  const kept = storeEnabled() ? { ...await storePayload(input, received), body: null } : { body: sql`${json}::jsonb` }
  const row = firstRow(await useDb().insert(uploads).values({ labId: key.labId, apiKeyId: key.id, schemaId, bodyHash: hash, ...kept })
    .returning({ id: uploads.id, status: uploads.status, createdAt: uploads.createdAt }))
  kickUploads()
  return { status: 202 as const, body: { id: row.id, status: row.status, statusUrl: `/api/v1/uploads/${row.id}`, receivedAt: row.createdAt.toISOString() } }
}

export async function uploadStatus(labId: string, id: string) {
  const row = await useDb().query.uploads.findFirst({ where: and(eq(uploads.id, id), eq(uploads.labId, labId)) })
  if (!row) throw problem(404, 'upload-not-found', 'No such upload in your lab.')
  return {
    id: row.id, status: row.status, receivedAt: row.createdAt.toISOString(), finishedAt: row.finishedAt?.toISOString() ?? null,
    acquisitionUrl: row.acquisitionId ? `/api/v1/acquisitions/${row.acquisitionId}` : null, problem: row.problem ?? null,
  }
}

/**
 * Processes pending uploads one by one. A row is claimed with SKIP LOCKED and a lease, so
 * several processes share the work and a crashed one's upload is taken up again.
 */
export async function processPendingUploads(limit = 2) {
  for (let i = 0; i < limit; i++) {
    const [claimed] = await useDb().execute<{ id: string }>(sql`
      update ${uploads} set status = 'processing', lease_until = now() + interval '5 minutes'
      where id = (select id from ${uploads} where status = 'pending' or (status = 'processing' and lease_until < now())
                  order by created_at limit 1 for update skip locked)
      returning id`)
    if (!claimed) return
    const row = (await useDb().query.uploads.findFirst({ where: eq(uploads.id, claimed.id) }))!
    try {
      const stored = row.arraysSha256 && row.rawSha256 && row.rawContentType
        ? { rawSha256: row.rawSha256, rawBytes: row.rawBytes ?? 0, rawContentType: row.rawContentType, arraysSha256: row.arraysSha256, arraysBytes: row.arraysBytes ?? 0 }
        : undefined
      const body = stored ? await loadPayload<AcquisitionInput>(stored.arraysSha256) : row.body as unknown as AcquisitionInput
      const result = await acceptAcquisition({ labId: row.labId }, body,
        { schemaId: row.schemaId ?? undefined, upload: { id: row.id, bodyHash: row.bodyHash ?? bodyHash(body) }, stored })
      // The acquisition's created_at (its month, in the foreign key) copied in SQL, not through a JS Date.
      await useDb().update(uploads).set({
        status: 'processed', acquisitionId: result.body.id, finishedAt: new Date(), leaseUntil: null,
        acquisitionCreatedAt: sql`(select a.created_at from ${acquisitions} a where a.id = ${result.body.id}::uuid)`,
      }).where(eq(uploads.id, row.id))
    }
    catch (error) {
      const doc = (error as { data?: { problem?: ProblemDocument } }).data?.problem
      // The store or the database not answering is no verdict on the upload: it waits for the next round.
      if (!doc || doc.status >= 500) { logError('[uploads] processing failed', error); await useDb().update(uploads).set({ status: 'pending', leaseUntil: null }).where(eq(uploads.id, row.id)); return }
      await useDb().update(uploads).set({ status: 'failed', problem: doc as unknown as Record<string, unknown>, finishedAt: new Date(), leaseUntil: null }).where(eq(uploads.id, row.id))
    }
  }
}

let running: Promise<unknown> | undefined
export function kickUploads() {
  running ??= processPendingUploads().catch(error => logError('[uploads]', error)).finally(() => { running = undefined })
}
