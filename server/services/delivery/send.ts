import pRetry from 'p-retry'
import type { AttemptClass } from '#shared/schemas/webhooks'
import type { Claimed } from './claim'
import { deliveryMessage, remembered, signedHeaders, type Message } from './message'
import { GuardRefusal } from './addressGuard'
import { postGuarded } from './outbound'
import { retryAfterSeconds } from './retry'
import { deliverySettings } from './settings'

// Phase two of the worker: each claimed delivery's message built (once per event), signed
// and sent through the SSRF guard. Nothing here touches the database.

// Unsealed secrets by their sealed text: a rotation seals a new text, so nothing goes stale.
const unsealCached = remembered(unseal)

export function secretsOf(row: { sealed_secret: string, previous_sealed_secret: string | null, previous_secret_until: string | null }): string[] {
  const list = [unsealCached(row.sealed_secret)]
  if (row.previous_sealed_secret && row.previous_secret_until && new Date(row.previous_secret_until) > new Date()) list.push(unsealCached(row.previous_sealed_secret))
  return list
}

export interface AttemptOutcome { class: AttemptClass, statusCode: number | null, error: string | null, excerpt: string | null, retryAfterS: number | null, durationMs: number }

/** Sends one message and classifies how it went; never throws. */
export async function sendOnce(url: string, headers: Record<string, string>, body: string | Buffer): Promise<AttemptOutcome> {
  const { timeoutMs, maxPayloadBytes } = deliverySettings()
  const started = Date.now()
  const done = (o: Omit<AttemptOutcome, 'durationMs'>): AttemptOutcome => ({ ...o, durationMs: Date.now() - started })
  if ((typeof body === 'string' ? Buffer.byteLength(body) : body.length) > maxPayloadBytes * 4) return done({ class: 'payload-too-large', statusCode: null, error: 'the message is larger than this hub sends', excerpt: null, retryAfterS: null })
  try {
    // p-retry covers a connection reset before an answer (a passing hiccup); the schedule covers the rest.
    const res = await pRetry(() => postGuarded(url, headers, body, { timeoutMs }), {
      retries: 1, minTimeout: 100,
      shouldRetry: ({ error }) => ['ECONNRESET', 'UND_ERR_SOCKET'].includes((error as { code?: string }).code ?? ''),
    })
    const code = res.statusCode
    const retryAfter = retryAfterSeconds(res.headers['retry-after'])
    const cls: AttemptClass = code >= 200 && code < 300 ? 'success' : code >= 300 && code < 400 ? 'redirect-refused' : code === 413 ? 'payload-too-large' : code >= 500 ? 'server-error' : 'client-error'
    return done({ class: cls, statusCode: code, error: cls === 'redirect-refused' ? `redirect to ${res.headers.location ?? '?'} not followed` : null, excerpt: res.excerpt, retryAfterS: retryAfter })
  }
  catch (error) {
    const e = error as { code?: string, name?: string, message?: string }
    if (error instanceof GuardRefusal || e.code === 'GUARD_REFUSED') return done({ class: 'guard-refused', statusCode: null, error: e.message ?? 'refused', excerpt: null, retryAfterS: null })
    const timedOut = e.name === 'TimeoutError' || e.name === 'AbortError' || ['UND_ERR_HEADERS_TIMEOUT', 'UND_ERR_BODY_TIMEOUT', 'UND_ERR_CONNECT_TIMEOUT'].includes(e.code ?? '')
    return done({ class: timedOut ? 'timeout' : 'connection-failed', statusCode: null, error: `${e.code ?? e.name ?? 'error'}: ${e.message ?? ''}`.slice(0, 500), excerpt: null, retryAfterS: null })
  }
}

/** A claimed delivery and its message, the body as the bytes to send (or why it has none). */
export interface Queued { row: Claimed, message: Message, bytes: Buffer | null, unbuilt: string | null }

/**
 * The claimed deliveries with their messages. An event owed to several endpoints has one
 * message, built and encoded once per claim and shared by its deliveries (the body does
 * not depend on the endpoint; only the signature does).
 */
export function withMessages(rows: Claimed[]): Queued[] {
  const { maxPayloadBytes, appUrl } = deliverySettings()
  const byEvent = new Map<string, Queued>()
  return rows.map((row) => {
    const shared = row.event_id ? byEvent.get(row.event_id) : undefined
    if (shared) return { ...shared, row }
    let queued: Queued
    try {
      const message = deliveryMessage(row, maxPayloadBytes, appUrl)
      queued = { row, message, bytes: Buffer.from(message.body), unbuilt: null }
    }
    catch (error) {
      queued = { row, message: { kind: 'test', body: '' }, bytes: null, unbuilt: (error as Error).message }
    }
    if (row.event_id) byEvent.set(row.event_id, queued)
    return queued
  })
}

/**
 * A finished attempt, waiting to be recorded. It keeps the body only when the log stores it
 * (not an event's whole message, which is rebuilt when shown), so the bodies of a group
 * waiting to be recorded do not outlive their sends.
 */
export interface Sent { row: Claimed, storedBody: string | null, headers: Record<string, string>, outcome: AttemptOutcome }

/** Signs and sends one claimed delivery; the database is not touched here, and it never throws. */
export async function send({ row, message, bytes, unbuilt }: Queued): Promise<Sent> {
  const storedBody = message.kind === 'event' ? null : message.body
  try {
    if (!bytes) throw new Error(unbuilt ?? 'no message')
    const headers = signedHeaders(row.id, bytes, secretsOf(row))
    const outcome = await sendOnce(row.url, headers, bytes)
    const log = useLog()
    if (log.isLevelEnabled('debug')) log.debug({ reqId: row.request_id, deliveryId: row.id, endpointId: row.endpoint_id, attempt: row.attempts + 1, class: outcome.class, statusCode: outcome.statusCode, ms: outcome.durationMs }, 'delivery sent')
    return { row, storedBody, headers, outcome }
  }
  catch (error) {
    return { row, storedBody, headers: {}, outcome: { class: 'client-error', statusCode: null, error: `not sent: ${(error as Error).message}`, excerpt: null, retryAfterS: null, durationMs: 0 } }
  }
}

