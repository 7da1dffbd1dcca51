import { createHmac, timingSafeEqual } from 'node:crypto'

// Two answers the delivery screens give from what is recorded: why a delivery stopped (or
// waits), in one sentence, and whether an attempt's recorded signature verifies against the
// endpoint's secret now. Pure: the caller reads the rows and the secrets.

export interface StopFacts {
  status: 'pending' | 'succeeded' | 'dead'
  eventId: string | null
  attempts: number
  nextAttemptAt: Date
  finishedAt: Date | null
  last: { class: string, statusCode: number | null, error: string | null } | null
  endpoint: { status: 'active' | 'paused' | 'disabled', disabledReason: string | null, blockedUntil: Date | null, consecutiveFailures: number }
}

export interface StopSettings { schedule: readonly number[], circuitFailures: number }

const answered = (last: NonNullable<StopFacts['last']>) => last.statusCode ? `HTTP ${last.statusCode}` : last.error ? `${last.class} (${last.error})` : last.class
const when = (d: Date) => d.toISOString().replace('T', ' ').slice(0, 19) + ' UTC'

/**
 * Why a delivery stopped, or what it waits for, from its row, its last attempt and its
 * endpoint as they are recorded; null once it was delivered. The reasons are the worker's:
 * a 410 disables the endpoint (record.ts), a refused address is never retried, a spent
 * schedule is dead (retry.ts), disabling an endpoint kills what waits for it, and an open
 * circuit holds the backlog until its probe.
 */
export function stopReason(f: StopFacts, s: StopSettings, now = new Date()): string | null {
  if (f.status === 'succeeded') return null
  const last = f.last
  if (f.status === 'dead') {
    if (!f.eventId) return `A test message is sent once and never retried${last ? `: the receiver answered ${answered(last)}` : ''}.`
    if (last?.class === 'guard-refused') return `Stopped: the endpoint's address was refused by the outbound guard (${last.error ?? 'not a public address'}); a refused address is never retried.`
    if (last?.statusCode === 410) return 'Stopped: the receiver answered 410 Gone, which disables the endpoint; resume it and replay to send again.'
    if (f.endpoint.status === 'disabled') return `Stopped: the endpoint was disabled (${f.endpoint.disabledReason ?? 'by its owner'}), which ends every delivery waiting for it.`
    if (f.attempts > s.schedule.length) return `Stopped: the retry schedule was spent after ${f.attempts} attempts${last ? `; the last answered ${answered(last)}` : ''}.`
    return `Stopped after ${f.attempts} of ${s.schedule.length + 1} attempts: the endpoint was disabled then, and has been resumed since.`
  }
  if (f.endpoint.status === 'paused') return 'Waiting: the endpoint is paused; it is sent when the endpoint is resumed.'
  if (f.endpoint.status === 'disabled') return `Waiting: the endpoint is disabled (${f.endpoint.disabledReason ?? 'by its owner'}); it is sent once the endpoint is resumed.`
  const blocked = f.endpoint.blockedUntil && f.endpoint.blockedUntil > now ? f.endpoint.blockedUntil : null
  if (blocked && f.endpoint.consecutiveFailures >= s.circuitFailures) return `Waiting: the endpoint's circuit is open after ${f.endpoint.consecutiveFailures} messages in a row failed on first try; one probe is sent at ${when(blocked)} before the backlog.`
  if (blocked) return `Waiting: the receiver asked Arcwise to wait until ${when(blocked)} (Retry-After).`
  if (!f.attempts) return `Not tried yet: due at ${when(f.nextAttemptAt)}.`
  return `Retrying: attempt ${f.attempts + 1} of at most ${s.schedule.length + 1} at ${when(f.nextAttemptAt)}${last ? `; the last answered ${answered(last)}` : ''}.`
}

export type SignatureVerdict = 'current' | 'previous' | 'none' | 'unsigned'

/**
 * Checks a recorded attempt's `webhook-signature` against the secrets given (current first,
 * then the previous one while it still signs): Standard Webhooks' v1, base64 of
 * HMAC-SHA256(secret, "{webhook-id}.{webhook-timestamp}.{body}"). No secret leaves here.
 */
export function checkRecordedSignature(headers: Record<string, string>, body: string, secrets: { current: string, previous: string | null }): SignatureVerdict {
  const id = headers['webhook-id']
  const timestamp = headers['webhook-timestamp']
  const given = (headers['webhook-signature'] ?? '').split(' ').filter(s => s.startsWith('v1,')).map(s => Buffer.from(s.slice(3), 'base64'))
  if (!id || !timestamp || !given.length) return 'unsigned'
  const matches = (secret: string) => {
    const expected = createHmac('sha256', Buffer.from(secret.replace(/^whsec_/, ''), 'base64')).update(`${id}.${timestamp}.${body}`).digest()
    return given.some(g => g.length === expected.length && timingSafeEqual(g, expected))
  }
  if (matches(secrets.current)) return 'current'
  if (secrets.previous && matches(secrets.previous)) return 'previous'
  return 'none'
}

/** The verdict in a sentence, as the console shows it. */
export function signatureSentence(v: SignatureVerdict): string {
  return {
    current: 'The recorded signature verifies with the endpoint\'s current secret.',
    previous: 'The recorded signature verifies with the endpoint\'s previous secret, which still signs during the rotation\'s overlap.',
    none: 'The recorded signature does not verify with the endpoint\'s current secret: the secret was rotated since this attempt.',
    unsigned: 'This attempt carries no Standard Webhooks signature.',
  }[v]
}
