import type { H3Event } from 'h3'
import { and, eq, sql } from 'drizzle-orm'
import { acquisitionInput, type AcquisitionInput } from '#shared/schemas/acquisitions'
import type { ProblemDocument } from '#shared/schemas/common'
import { uploads } from '../database/schema'
import { fileKindOf, parseCsvUpload, parseJcampUpload, parseMzmlUpload, type FileKind } from './fileFormats'
import type { LabKey } from './apiKeys'

// An acquisition body arrives as JSON or as a file (CSV, JCAMP-DX, mzML; raw body or one
// multipart part). Bodies of more than INLINE_POINTS points are stored and processed in
// the background: the caller gets 202 and a status URL.

export const MAX_UPLOAD_BYTES = 64 * 1024 * 1024
export const INLINE_POINTS = 250_000

const parsers: Record<FileKind, (e: H3Event, max: number) => Promise<Record<string, unknown>>> = {
  csv: parseCsvUpload, jcamp: parseJcampUpload, mzml: parseMzmlUpload,
}

function parseOrProblem(value: unknown): AcquisitionInput {
  const r = acquisitionInput.safeParse(value)
  if (r.success) return r.data
  const errors = fieldErrors(r.error)
  throw problem(422, 'validation-failed', errors.map(e => `${e.path}: ${e.message}`).join('; '), { errors })
}

/** The acquisition body of the request, whatever form it came in. */
export async function readAcquisitionBody(event: H3Event): Promise<AcquisitionInput> {
  assertBodySize(event, MAX_UPLOAD_BYTES)
  const contentType = getRequestHeader(event, 'content-type') ?? ''
  if (contentType.startsWith('multipart/form-data')) {
    const parts = await readMultipartFormData(event)
    const file = parts?.find(p => p.name === 'file')
    if (!file) throw fieldProblem('file', 'a multipart upload needs a part named "file"')
    const kind = fileKindOf(file.type ?? '') ?? kindByName(file.filename)
    if (!kind || kind === 'json') return parseOrProblem(jsonPart(file.data))
    // The part is parsed through the same stream parsers, from memory.
    const { Readable } = await import('node:stream')
    // A view of the event whose body is the part; the rest (the query string with metadata
    // the file lacks) is read through the prototype.
    const fake = Object.assign(Object.create(event) as H3Event, { node: { ...event.node, req: Object.assign(Readable.from(file.data), { headers: {}, url: event.node.req.url }) } })
    return parseOrProblem(await parsers[kind](fake, MAX_UPLOAD_BYTES))
  }
  const kind = fileKindOf(contentType)
  if (!kind) throw problem(415, 'unsupported-media-type', `Content-Type ${contentType} is not taken here: send application/json, text/csv, chemical/x-jcamp-dx, application/mzml+xml or multipart/form-data.`)
  if (kind === 'json') return readValidBody(event, acquisitionInput)
  return parseOrProblem(await parsers[kind](event, MAX_UPLOAD_BYTES))
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
export async function deferAcquisition(key: LabKey, input: AcquisitionInput, schemaId: string) {
  // The body goes in as the text already made for its hash, not serialised a second time.
  const { json, hash } = canonicalBody(input)
  const row = firstRow(await useDb().insert(uploads).values({ labId: key.labId, apiKeyId: key.id, schemaId, bodyHash: hash, body: sql`${json}::jsonb` })
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
      const result = await acceptAcquisition({ labId: row.labId }, row.body as unknown as AcquisitionInput,
        { schemaId: row.schemaId ?? undefined, upload: { id: row.id, bodyHash: row.bodyHash ?? bodyHash(row.body) } })
      await useDb().update(uploads).set({ status: 'processed', acquisitionId: result.body.id, finishedAt: new Date(), leaseUntil: null }).where(eq(uploads.id, row.id))
    }
    catch (error) {
      const doc = (error as { data?: { problem?: ProblemDocument } }).data?.problem
      if (!doc) { logError('[uploads] processing failed', error); await useDb().update(uploads).set({ status: 'pending', leaseUntil: null }).where(eq(uploads.id, row.id)); return }
      await useDb().update(uploads).set({ status: 'failed', problem: doc as unknown as Record<string, unknown>, finishedAt: new Date(), leaseUntil: null }).where(eq(uploads.id, row.id))
    }
  }
}

let running: Promise<unknown> | undefined
export function kickUploads() {
  running ??= processPendingUploads().catch(error => logError('[uploads]', error)).finally(() => { running = undefined })
}
