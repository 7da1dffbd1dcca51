import { hostname } from 'node:os'
import { randomUUID } from 'node:crypto'
import { and, eq, isNotNull, sql } from 'drizzle-orm'
import pRetry from 'p-retry'
import { Webhook } from 'standardwebhooks'
import { DEFAULT_RETRY_SCHEDULE_S, type AttemptClass } from '#shared/schemas/webhooks'
import { deliveries, deliveryAttempts, events, labs, partners, users, webhookEndpoints } from '../database/schema'

// The delivery worker. Deliveries are rows (written with the event they carry); a worker
// claims due rows with FOR UPDATE SKIP LOCKED and a lease, sends each through the SSRF
// guard, signs it per Standard Webhooks (the `webhook-id` is the delivery's id, unchanged
// across retries), records the attempt, and schedules the next or finishes. A worker that
// dies keeps nothing: its leases run out and another worker takes the rows.

const workerId = `${hostname()}:${process.pid}:${randomUUID().slice(0, 8)}`

function config() {
  const w = useRuntimeConfig().webhooks
  const schedule = String(w.retrySchedule ?? '').split(',').map(Number).filter(n => Number.isFinite(n) && n >= 0)
  return {
    schedule: schedule.length ? schedule : DEFAULT_RETRY_SCHEDULE_S,
    timeoutMs: Number(w.timeoutMs),
    leaseSeconds: Number(w.leaseSeconds),
    concurrency: Number(w.concurrency),
    maxPayloadBytes: Number(w.maxPayloadBytes),
    disableAfterMs: Number(w.disableAfterHours) * 3600_000,
  }
}

type Claimed = {
  id: string
  endpoint_id: string
  event_id: string | null
  event_type: string
  test_payload: Record<string, unknown> | null
  attempts: number
  replay_requested: boolean
  url: string
  sealed_secret: string
  previous_sealed_secret: string | null
  previous_secret_until: string | null
  payload: Record<string, unknown> | null
  sequence: number | null
  lab: string | null
  event_at: string | null
}

/** Claims up to `limit` due deliveries of active endpoints for this worker. */
export async function claimDueDeliveries(limit: number): Promise<Claimed[]> {
  const { leaseSeconds } = config()
  const rows = await useDb().execute<Claimed>(sql`
    with due as (
      select d.id from ${deliveries} d join ${webhookEndpoints} e on e.id = d.endpoint_id and e.status = 'active'
      where d.status = 'pending' and d.next_attempt_at <= now() and (d.lease_until is null or d.lease_until < now())
      order by d.next_attempt_at limit ${limit} for update of d skip locked),
    claimed as (
      update ${deliveries} d set lease_owner = ${workerId}, lease_until = now() + make_interval(secs => ${leaseSeconds})
      from due where d.id = due.id
      returning d.id, d.endpoint_id, d.event_id, d.event_type, d.test_payload, d.attempts, d.replay_requested)
    select c.*, e.url, e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until::text,
           ev.payload, ev.sequence, l.slug as lab, ev.created_at::text as event_at
    from claimed c join ${webhookEndpoints} e on e.id = c.endpoint_id
    left join ${events} ev on ev.id = c.event_id left join ${labs} l on l.id = ev.lab_id`)
  return [...rows]
}

/** The body a delivery sends: Standard Webhooks' `{ type, timestamp, data }`. */
export function deliveryBody(row: Pick<Claimed, 'event_type' | 'test_payload' | 'payload' | 'sequence' | 'lab' | 'event_at' | 'event_id'>, maxBytes: number): string {
  if (!row.payload) return JSON.stringify({ type: row.event_type, timestamp: new Date().toISOString(), data: row.test_payload ?? {} })
  const timestamp = new Date(row.event_at!).toISOString()
  const full = JSON.stringify({ type: row.event_type, timestamp, data: { eventId: row.event_id, lab: row.lab, sequence: Number(row.sequence), ...row.payload } })
  if (Buffer.byteLength(full) <= maxBytes) return full
  // Too large to send whole: the summary and where to fetch the rest, never a truncation.
  const p = row.payload as { id: string, runId: string, instrument: string, acquiredAt: string, sampleRef: string | null, status: string, receivedAt: string }
  return JSON.stringify({ type: row.event_type, timestamp, data: {
    eventId: row.event_id, lab: row.lab, sequence: Number(row.sequence), thin: true,
    id: p.id, runId: p.runId, instrument: p.instrument, acquiredAt: p.acquiredAt, sampleRef: p.sampleRef, status: p.status, receivedAt: p.receivedAt,
    resultUrl: `${useRuntimeConfig().appUrl}/api/v1/results/${p.id}`,
  } })
}

/** Standard Webhooks headers; during a rotation the previous secret signs too. */
export function signedHeaders(id: string, body: string, secrets: string[], at = new Date()): Record<string, string> {
  const signatures = secrets.map(s => new Webhook(s).sign(id, at, body))
  return {
    'content-type': 'application/json',
    'user-agent': 'Arcwise-Webhooks/1',
    'webhook-id': id,
    'webhook-timestamp': String(Math.floor(at.getTime() / 1000)),
    'webhook-signature': signatures.join(' '),
  }
}

export function secretsOf(row: { sealed_secret: string, previous_sealed_secret: string | null, previous_secret_until: string | null }): string[] {
  const list = [unseal(row.sealed_secret)]
  if (row.previous_sealed_secret && row.previous_secret_until && new Date(row.previous_secret_until) > new Date()) list.push(unseal(row.previous_sealed_secret))
  return list
}

export interface AttemptOutcome { class: AttemptClass, statusCode: number | null, error: string | null, excerpt: string | null, retryAfterS: number | null, durationMs: number }

/** Sends one message and classifies how it went; never throws. */
export async function sendOnce(url: string, headers: Record<string, string>, body: string): Promise<AttemptOutcome> {
  const { timeoutMs, maxPayloadBytes } = config()
  const started = Date.now()
  const done = (o: Omit<AttemptOutcome, 'durationMs'>): AttemptOutcome => ({ ...o, durationMs: Date.now() - started })
  if (Buffer.byteLength(body) > maxPayloadBytes * 4) return done({ class: 'payload-too-large', statusCode: null, error: 'the message is larger than this hub sends', excerpt: null, retryAfterS: null })
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

/** Retry-After as seconds, from delta-seconds or an HTTP date (RFC 9110 §10.2.3). */
export function retryAfterSeconds(value: string | undefined): number | null {
  if (!value) return null
  if (/^\d+$/.test(value.trim())) return Number(value.trim())
  const at = Date.parse(value)
  return Number.isNaN(at) ? null : Math.max(0, Math.round((at - Date.now()) / 1000))
}

/**
 * When to try again after the `attempts`-th failure, or null when the schedule is spent.
 * Up to ±10 % jitter spreads retries of many deliveries; Retry-After is honoured when later.
 */
export function nextDelaySeconds(attempts: number, retryAfterS: number | null, schedule = config().schedule, random = Math.random): number | null {
  const base = schedule[attempts - 1]
  if (base === undefined) return null
  const jittered = base * (0.9 + 0.2 * random())
  return Math.max(jittered, Math.min(retryAfterS ?? 0, 86_400))
}

/** Sends one claimed delivery and records the attempt and what happens next. */
async function deliver(row: Claimed) {
  const { maxPayloadBytes, disableAfterMs } = config()
  const body = deliveryBody(row, maxPayloadBytes)
  let headers: Record<string, string>
  let outcome: AttemptOutcome
  try {
    headers = signedHeaders(row.id, body, secretsOf(row))
    outcome = await sendOnce(row.url, headers, body)
  }
  catch (error) {
    headers = {}
    outcome = { class: 'client-error', statusCode: null, error: `not sent: ${(error as Error).message}`, excerpt: null, retryAfterS: null, durationMs: 0 }
  }
  const attempts = row.attempts + 1
  const gone = outcome.statusCode === 410
  const delay = outcome.class === 'success' || outcome.class === 'guard-refused' || gone ? null : nextDelaySeconds(attempts, outcome.retryAfterS)
  const status = outcome.class === 'success' ? 'succeeded' : delay === null ? 'dead' : 'pending'
  await useDb().transaction(async (tx) => {
    // Only the worker holding the lease records the attempt as the delivery's state.
    const [updated] = await tx.update(deliveries).set({
      attempts, status, lastClass: outcome.class, lastStatusCode: outcome.statusCode, replayRequested: false, leaseOwner: null, leaseUntil: null,
      nextAttemptAt: delay === null ? sql`${deliveries.nextAttemptAt}` : sql`now() + make_interval(secs => ${delay})`,
      finishedAt: status === 'pending' ? null : new Date(),
    }).where(and(eq(deliveries.id, row.id), eq(deliveries.leaseOwner, workerId))).returning({ id: deliveries.id })
    if (!updated) return
    await tx.insert(deliveryAttempts).values({
      deliveryId: row.id, number: attempts, durationMs: outcome.durationMs, class: outcome.class, statusCode: outcome.statusCode,
      error: outcome.error, responseExcerpt: outcome.excerpt, requestHeaders: headers, requestBody: body, replay: row.replay_requested,
    })
    if (outcome.class === 'success') {
      await tx.update(webhookEndpoints).set({ failingSince: null }).where(and(eq(webhookEndpoints.id, row.endpoint_id), isNotNull(webhookEndpoints.failingSince)))
    }
    else if (gone) {
      await disableEndpoint(tx, row.endpoint_id, 'the receiver answered 410 Gone')
    }
    else {
      const [ep] = await tx.update(webhookEndpoints).set({ failingSince: sql`coalesce(${webhookEndpoints.failingSince}, now())` })
        .where(eq(webhookEndpoints.id, row.endpoint_id)).returning({ failingSince: webhookEndpoints.failingSince })
      if (ep?.failingSince && Date.now() - ep.failingSince.getTime() >= disableAfterMs) {
        await disableEndpoint(tx, row.endpoint_id, `no delivery succeeded for ${Math.round(disableAfterMs / 3600_000)} hours`)
      }
    }
  })
}

/**
 * Disables an endpoint: its waiting deliveries become dead (they can be replayed once it is
 * back), and its partner's integrators and the admins are e-mailed.
 */
export async function disableEndpoint(tx: Queryable, endpointId: string, reason: string) {
  const [ep] = await tx.update(webhookEndpoints).set({ status: 'disabled', disabledReason: reason, updatedAt: new Date() })
    .where(and(eq(webhookEndpoints.id, endpointId), sql`${webhookEndpoints.status} <> 'disabled'`)).returning()
  if (!ep) return
  await tx.update(deliveries).set({ status: 'dead', finishedAt: new Date(), leaseOwner: null, leaseUntil: null })
    .where(and(eq(deliveries.endpointId, endpointId), eq(deliveries.status, 'pending')))
  const partner = await tx.query.partners.findFirst({ where: eq(partners.id, ep.partnerId) })
  const owners = await tx.select({ email: users.email }).from(users)
    .where(and(eq(users.status, 'active'), sql`(${users.role} = 'admin' or (${users.role} = 'integrator' and ${users.partnerId} = ${ep.partnerId}))`))
  const link = `${useRuntimeConfig().appUrl}/console/partners/${ep.partnerId}`
  for (const o of owners) {
    await queueMail(tx, linkMail(o.email, `Webhook endpoint disabled: ${ep.url}`, [
      `Arcwise disabled the webhook endpoint ${ep.url} of ${partner?.name ?? 'a partner'}: ${reason}.`,
      'Its waiting deliveries are kept as dead deliveries. Fix the receiver, resume the endpoint, and replay them from the delivery log.',
    ], { label: 'Open the partner in the console', url: link }))
  }
  await recordAudit(tx, { actor: { id: null, label: 'delivery worker' }, action: 'endpoint.disabled', targetType: 'webhook-endpoint', targetId: endpointId, detail: { url: ep.url, reason } })
}

/** One round: claim due deliveries and send them, `concurrency` at a time. */
export async function runDeliveryRound(): Promise<number> {
  const { concurrency } = config()
  const claimed = await claimDueDeliveries(concurrency)
  await Promise.all(claimed.map(row => deliver(row).catch(error => console.error('[delivery]', row.id, error))))
  return claimed.length
}

let timer: NodeJS.Timeout | undefined
let running: Promise<void> | undefined
let again = false
let stopped = true

/** Wakes the worker now (after an event was recorded) rather than at its next poll. */
export function kickDeliveries() {
  if (stopped) return
  if (running) { again = true; return }
  running = (async () => {
    try {
      do { again = false } while (await runDeliveryRound() > 0 || again)
    }
    catch (error) { console.error('[delivery] round failed', error) }
  })().finally(() => { running = undefined })
}

export function startDeliveryWorker() {
  stopped = false
  timer = setInterval(kickDeliveries, Number(useRuntimeConfig().webhooks.pollMs))
  timer.unref()
  kickDeliveries()
}

/** Stops the worker after its current round and hands back whatever it still holds. */
export async function stopDeliveryWorker() {
  stopped = true
  clearInterval(timer)
  await running?.catch(() => {})
  await useDb().update(deliveries).set({ leaseOwner: null, leaseUntil: null })
    .where(and(eq(deliveries.leaseOwner, workerId), eq(deliveries.status, 'pending')))
}
