import { Readable, Transform } from 'node:stream'
import type { H3Event } from 'h3'
import { problem } from './problem'

// The one place request bodies are read. server/middleware/body.ts gives every request with
// a body a byte cap for its route and hands h3 a counted stream in place of the raw socket,
// so h3's own readers (readBody, readRawBody, readFormData, getRequestWebStream) read through
// the same counter as readBodyStream below. Passing the cap answers 413 at once, whether or
// not Content-Length was declared (chunked bodies too); nothing is buffered past the cap.

/** Console, token and other JSON routes. */
export const JSON_BODY_LIMIT = 1024 * 1024

const counted = Symbol('arcwise.countedBody')
interface BodyGuard { cap: number, stream?: Readable, web?: ReadableStream, kept?: Buffer[] }
type GuardedEvent = H3Event & { [counted]?: BodyGuard }

/** The byte cap of a request body on this route: acquisition uploads take the configured upload limit. */
export function bodyCapOf(method: string, path: string): number {
  if (method === 'POST' && isUploadRoute(path.split('?')[0]!)) return uploadLimitBytes()
  return JSON_BODY_LIMIT
}

export function uploadLimitBytes(): number {
  return Number(useRuntimeConfig().ingest.maxUploadBytes)
}

// POST /api/v1/acquisitions, POST /api/console/labs/{id}/acquisitions and the benchmark's
// baseline route (which takes the same bodies). Segments, not a pattern: nothing to backtrack.
function isUploadRoute(path: string): boolean {
  const s = path.split('/').filter(Boolean)
  if (s.length === 3 && s[0] === 'api' && s[1] === 'v1' && s[2] === 'acquisitions') return true
  if (s.length === 5 && s[0] === 'api' && s[1] === 'console' && s[2] === 'labs' && s[4] === 'acquisitions') return true
  // A whole sequence carries its acquisitions inline; one posted into a sequence is one acquisition.
  if (s[0] === 'api' && s[1] === 'v1' && s[2] === 'sequences' && (s.length === 3 || (s.length === 5 && s[4] === 'acquisitions'))) return true
  return s.length === 2 && s[0] === '_bench' && s[1] === 'baseline'
}

export function bodyTooLarge(cap: number, declared?: number) {
  return problem(413, 'payload-too-large',
    declared === undefined ? `The body passes ${cap} bytes; at most ${cap} are accepted here.` : `The body is ${declared} bytes; at most ${cap} are accepted here.`)
}

/**
 * Puts the route's cap on the request body (called by the body middleware for every request
 * that can carry one). A declared length over the cap is refused before anything is read.
 */
export function guardRequestBody(event: H3Event, cap: number) {
  const req = event.node.req
  // In-process requests (Nitro's local fetch) carry their body in memory already.
  if (!req.socket || '__unenv__' in req) return
  const declared = Number.parseInt(req.headers['content-length'] ?? '', 10)
  if (declared > cap) {
    closeUnreadBody(event)
    throw bodyTooLarge(cap, declared)
  }
  ;(event as GuardedEvent)[counted] = { cap }
  // h3 reads `_requestBody` before the socket: a getter, so the stream is made only when read.
  Object.defineProperty(event, '_requestBody', {
    configurable: true,
    get: () => {
      const guard = (event as GuardedEvent)[counted]!
      if (!hasBody(event)) return undefined
      guard.web ??= Readable.toWeb(readBodyStream(event)) as ReadableStream
      return guard.web
    },
  })
}

function hasBody(event: H3Event) {
  const h = event.node.req.headers
  return Number.parseInt(h['content-length'] ?? '', 10) > 0 || String(h['transfer-encoding'] ?? '').toLowerCase().includes('chunked')
}

/**
 * The request body as a stream that fails with a 413 problem as soon as it passes the
 * route's cap. One stream per request: every reader shares it.
 */
export function readBodyStream(event: H3Event): Readable {
  const guard = (event as GuardedEvent)[counted]
  if (!guard) throw new Error('request body read without the body middleware\'s cap (server/middleware/body.ts)')
  if (guard.stream) return guard.stream
  const { req } = event.node
  let seen = 0
  const limiter = new Transform({
    transform(chunk: Buffer, _encoding, done) {
      seen += chunk.length
      if (seen <= guard.cap) {
        guard.kept?.push(chunk)
        return done(null, chunk)
      }
      req.unpipe(limiter)
      done(bodyTooLarge(guard.cap))
    },
  })
  req.on('error', error => limiter.destroy(error))
  closeUnreadBody(event)
  guard.stream = req.pipe(limiter)
  return guard.stream
}

/**
 * Keeps the request's bytes as they pass the counter, for ingest to store the body exactly as
 * it was received (issue 23). Call before the body is read.
 */
export function keepReceivedBody(event: H3Event) {
  const guard = (event as GuardedEvent)[counted]
  if (guard && !guard.stream) guard.kept = []
}

/** The bytes keepReceivedBody kept and their Content-Type; undefined for requests it did not see. */
export function receivedBody(event: H3Event): { bytes: Buffer, contentType: string } | undefined {
  const kept = (event as GuardedEvent)[counted]?.kept
  if (!kept) return undefined
  return { bytes: Buffer.concat(kept), contentType: getRequestHeader(event, 'content-type') || 'application/octet-stream' }
}

/**
 * A reader that stopped early (the cap, a refused header line) leaves the rest of the body
 * unread. Once the answer is out, what still arrives is discarded for a short while, so the
 * client can read the answer (closing on unread data would reset the connection under it),
 * and then the connection is closed: a client still sending is never read to the end.
 */
function closeUnreadBody(event: H3Event) {
  const { req, res } = event.node
  res.once('finish', () => {
    if (req.complete) return
    req.unpipe()
    req.removeAllListeners('data')
    req.resume()
    const timer = setTimeout(() => req.socket?.destroy(), LINGER_MS)
    timer.unref()
    req.once('end', () => clearTimeout(timer))
  })
}
const LINGER_MS = 2000

/**
 * The whole body as text, read through the counter (at most the route's cap): h3's readRawBody
 * reads the counted stream that guardRequestBody put in its way (in-process requests, which are
 * not guarded, carry their body in memory already).
 */
export async function readBodyText(event: H3Event): Promise<string> {
  return (await readRawBody(event, 'utf8')) ?? ''
}

/** Everything a stream gives, as one buffer (the stream is capped by whoever made it). */
export async function readStreamBytes(stream: AsyncIterable<Buffer | Uint8Array>): Promise<Buffer> {
  const chunks: Buffer[] = []
  for await (const chunk of stream) chunks.push(chunk as Buffer)
  return Buffer.concat(chunks)
}
