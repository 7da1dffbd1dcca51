import { encodeArrays, decodeArrays } from './arrays'
import { claimObjects, getObjectBytes, objectKey, putObject, sha256Of } from './objects'

// An acquisition's raw data in the store: the body as the lab sent it (raw/) and the parsed
// body with its arrays as float64 (arrays/). PostgreSQL keeps the hashes and sizes.

/** The bytes of the request as received, with their Content-Type. */
export interface ReceivedBody { bytes: Buffer, contentType: string }

/** What a row keeps of its stored raw data (the column names of acquisitions and uploads). */
export interface PayloadRef {
  rawSha256: string
  rawBytes: number
  rawContentType: string
  arraysSha256: string
  arraysBytes: number
}

/**
 * Stores both objects of one acquisition before its row is written: claimed, then put unless
 * already there (a key this claim inserted is put without asking: objects.ts, putObject).
 * `received` missing (an acquisition inside a sequence body) stores the acquisition's own JSON
 * text as its raw body. Throws a 503 problem when the store fails.
 */
export async function storePayload(input: object, received: ReceivedBody | undefined): Promise<PayloadRef> {
  const raw = received ?? { bytes: Buffer.from(JSON.stringify(input), 'utf8'), contentType: 'application/json' }
  const arrays = encodeArrays(input)
  const rawSha = sha256Of(raw.bytes)
  const arraysSha = sha256Of(arrays)
  const rawKey = objectKey('raw', rawSha)
  const arraysKey = objectKey('arrays', arraysSha)
  const fresh = await claimObjects([{ key: rawKey, bytes: raw.bytes.length }, { key: arraysKey, bytes: arrays.length }])
  await Promise.all([
    putObject('raw', raw.bytes, raw.contentType, rawSha, fresh.has(rawKey)),
    putObject('arrays', arrays, 'application/vnd.arcwise.arrays', arraysSha, fresh.has(arraysKey)),
  ])
  return { rawSha256: rawSha, rawBytes: raw.bytes.length, rawContentType: raw.contentType, arraysSha256: arraysSha, arraysBytes: arrays.length }
}

/** The parsed body of a stored acquisition, from its arrays object. */
export async function loadPayload<T = Record<string, unknown>>(arraysSha256: string): Promise<T> {
  return decodeArrays<T>(await getObjectBytes('arrays', arraysSha256))
}

/** A row's raw data, whichever way it is kept: the store, the old JSON column, or removed. */
export interface PayloadColumns { payload?: unknown, arraysSha256: string | null, rawRemovedAt: Date | null }

/**
 * The parsed body of an acquisition row: from the store when the row references it, else the
 * JSON column of rows from before the store; 410 when the lab's retention removed it.
 */
export async function payloadOf<T = Record<string, unknown>>(row: PayloadColumns): Promise<T> {
  if (row.rawRemovedAt) throw rawDataRemoved(row.rawRemovedAt)
  if (row.arraysSha256) return loadPayload<T>(row.arraysSha256)
  if (row.payload) return row.payload as T
  throw problem(410, 'raw-data-removed', 'The raw data of this acquisition is no longer kept.')
}

export function rawDataRemoved(at: Date) {
  return problem(410, 'raw-data-removed', `The raw data of this acquisition was removed on ${at.toISOString().slice(0, 10)} under the lab's retention setting; its results and their numbers are kept.`)
}
