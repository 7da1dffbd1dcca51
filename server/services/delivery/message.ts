import { createHmac } from 'node:crypto'

// The message a delivery sends and its Standard Webhooks signature. Pure: no database, no
// configuration (tests/unit/delivery-message.test.ts imports it as it is).

/** What a message is built from: a claimed delivery's event (or test payload), as PostgreSQL gives it. */
export type BodySource = {
  event_id: string | null
  event_type: string
  test_payload: Record<string, unknown> | null
  // The event's payload as PostgreSQL's JSON text: spliced into the body, never re-serialised.
  payload_text: string | null
  sequence: number | null
  lab: string | null
  event_at: string | null
}

/**
 * A delivery's message: its body and what kind it is. An event's message is the whole event
 * or, over `maxBytes`, its thin form; either is the same on every retry (its timestamp is the
 * event's own time).
 */
export interface Message { body: string, kind: 'event' | 'thin' | 'test' }

/** The message a delivery sends: Standard Webhooks' `{ type, timestamp, data }`. */
export function deliveryMessage(row: BodySource, maxBytes: number, appUrl: string): Message {
  if (!row.payload_text) return { kind: 'test', body: JSON.stringify({ type: row.event_type, timestamp: new Date().toISOString(), data: row.test_payload ?? {} }) }
  const timestamp = new Date(row.event_at!).toISOString()
  const head = { eventId: row.event_id, lab: row.lab, sequence: Number(row.sequence) }
  // `data` is the stored payload object with the event's fields first (spliced as text).
  const full = `{"type":${JSON.stringify(row.event_type)},"timestamp":"${timestamp}","data":${JSON.stringify(head).slice(0, -1)},${row.payload_text.slice(1)}}`
  if (Buffer.byteLength(full) <= maxBytes) return { kind: 'event', body: full }
  // Too large to send whole: the summary and where to fetch the rest, never a truncation.
  const p = JSON.parse(row.payload_text) as { id: string, runId: string, instrument: string, acquiredAt: string, sampleRef: string | null, status: string, receivedAt: string }
  return { kind: 'thin', body: JSON.stringify({ type: row.event_type, timestamp, data: {
    ...head, thin: true,
    id: p.id, runId: p.runId, instrument: p.instrument, acquiredAt: p.acquiredAt, sampleRef: p.sampleRef, status: p.status, receivedAt: p.receivedAt,
    resultUrl: `${appUrl}/api/v1/results/${p.id}`,
  } }) }
}

/** `fn` remembered by its argument, for at most 1,000 arguments at a time (then forgotten). */
export function remembered<V>(fn: (key: string) => V): (key: string) => V {
  const known = new Map<string, V>()
  return (key) => {
    let value = known.get(key)
    if (value === undefined) {
      if (known.size >= 1000) known.clear()
      known.set(key, value = fn(key))
    }
    return value
  }
}

const hmacKey = remembered(secret => Buffer.from(secret.replace(/^whsec_/, ''), 'base64'))

/**
 * Standard Webhooks headers; during a rotation the previous secret signs too. The signature
 * is the spec's `v1,` + base64(HMAC-SHA256(secret, "{id}.{timestamp}.{body}")), computed with
 * node:crypto: the standardwebhooks package's pure-JavaScript HMAC was a visible share of the
 * worker's time in bench:delivery (DEVELOPERS.md, Measured). The tests verify every
 * signature with that package.
 */
export function signedHeaders(id: string, body: string | Buffer, secrets: string[], at = new Date()): Record<string, string> {
  const timestamp = Math.floor(at.getTime() / 1000)
  // The signed content is fed in two parts, so the body is not copied into a new string.
  const signatures = secrets.map(s => `v1,${createHmac('sha256', hmacKey(s)).update(`${id}.${timestamp}.`).update(body).digest('base64')}`)
  return {
    'content-type': 'application/json',
    'user-agent': 'Arcwise-Webhooks/1',
    'webhook-id': id,
    'webhook-timestamp': String(timestamp),
    'webhook-signature': signatures.join(' '),
  }
}

