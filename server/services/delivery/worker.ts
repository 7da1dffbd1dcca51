import { hostname } from 'node:os'
import { createHmac, randomUUID } from 'node:crypto'
import { and, eq, inArray, sql } from 'drizzle-orm'
import pRetry from 'p-retry'
import { DEFAULT_RETRY_SCHEDULE_S, type AttemptClass } from '#shared/schemas/webhooks'
import { deliveries, deliveryAttempts, events, labs, partners, users, webhookEndpoints } from '../../database/schema'
import { linkMail, queueMail } from '../mail'
import { GuardRefusal, postGuarded } from './outbound'

// The delivery worker. Deliveries are rows (written with the event they carry); a worker
// claims due rows with FOR UPDATE SKIP LOCKED and a lease, sends each through the SSRF
// guard, signs it per Standard Webhooks (the `webhook-id` is the delivery's id, unchanged
// across retries), records the attempt, and schedules the next or finishes. A worker that
// dies keeps nothing: its leases run out and another worker takes the rows.

const workerId = `${hostname()}:${process.pid}:${randomUUID().slice(0, 8)}`

// Read once: the runtime config is fixed for the life of the process, and the worker asks
// for it on every send (as outbound.ts does for its guard settings).
let settings: ReturnType<typeof readConfig> | undefined
const config = () => (settings ??= readConfig())

function readConfig() {
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
  // The event's payload as PostgreSQL's JSON text: spliced into the body, never re-serialised.
  payload_text: string | null
  sequence: number | null
  lab: string | null
  event_at: string | null
}

// The least an endpoint offers to a claim. A claim that brings fewer rows than this found
// every due delivery: no endpoint had more than it offered.
const SHARE_MIN = 32

/** Claims up to `limit` due deliveries of active endpoints for this worker, leased for `leaseSeconds`. */
export async function claimDueDeliveries(limit: number, leaseSeconds: number): Promise<Claimed[]> {
  // The plan must not depend on the table's statistics: just after a bulk of events they say
  // no row is leased, and PostgreSQL then joined the claimed rows by scanning the whole table
  // (most of 66 ms per claim of 256 in bench:delivery). Rows are therefore found by their ids
  // (`= any(array(...))`, always the primary key), never by a join the planner may choose.
  const rows = await useDb().execute<Claimed>(sql`
    with candidates as (
      select c.id, c.next_attempt_at from ${webhookEndpoints} e cross join lateral (
        select d.id, d.next_attempt_at from ${deliveries} d
        where d.endpoint_id = e.id and d.status = 'pending' and d.next_attempt_at <= now() and (d.lease_until is null or d.lease_until < now())
        -- Each endpoint offers its share of the claim (at least SHARE_MIN), not the whole
        -- claim: a claim of 256 across 10 endpoints read 2,560 rows to keep 256.
        order by d.next_attempt_at limit greatest(${SHARE_MIN}, ceil(${limit}::float8 / greatest(1, (select count(*) from ${webhookEndpoints} where status = 'active'))))) c
      where e.status = 'active' order by c.next_attempt_at limit ${limit}),
    -- Locked after they are chosen (and checked again once locked), so the rows of other
    -- endpoints that the choice passed over are not locked.
    due as (
      select d.id from ${deliveries} d
      where d.id = any(array(select id from candidates)) and d.status = 'pending' and (d.lease_until is null or d.lease_until < now())
      for update of d skip locked),
    claimed as (
      update ${deliveries} d set lease_owner = ${workerId}, lease_until = now() + make_interval(secs => ${leaseSeconds})
      where d.id = any(array(select id from due))
      returning d.id, d.endpoint_id, d.event_id, d.event_type, d.test_payload, d.attempts, d.replay_requested)
    select c.*, e.url, e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until::text,
           -- An event owed to several endpoints: its payload comes once, on the first of its rows.
           case when row_number() over (partition by c.event_id order by c.id) = 1 then ev.payload::text end as payload_text,
           ev.sequence, l.slug as lab, ev.created_at::text as event_at
    from claimed c join ${webhookEndpoints} e on e.id = c.endpoint_id
    left join ${events} ev on ev.id = c.event_id left join ${labs} l on l.id = ev.lab_id`)
  const payloads = new Map<string, string>()
  for (const r of rows) if (r.event_id && r.payload_text !== null) payloads.set(r.event_id, r.payload_text)
  return rows.map(r => r.event_id ? { ...r, payload_text: payloads.get(r.event_id) ?? null } : r)
}

type BodySource = Pick<Claimed, 'event_type' | 'test_payload' | 'payload_text' | 'sequence' | 'lab' | 'event_at' | 'event_id'>

/**
 * A delivery's message: its body and what kind it is. An event's message is the whole event
 * or, over `maxBytes`, its thin form; either is the same on every retry (its timestamp is the
 * event's own time).
 */
export interface Message { body: string, kind: 'event' | 'thin' | 'test' }

/** The message a delivery sends: Standard Webhooks' `{ type, timestamp, data }`. */
export function deliveryMessage(row: BodySource, maxBytes: number): Message {
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
    resultUrl: `${useRuntimeConfig().appUrl}/api/v1/results/${p.id}`,
  } }) }
}

/** An event's whole message as the worker sent it, for an attempt that did not store its body. */
export async function eventMessageBody(eventId: string): Promise<string | null> {
  const [row] = await useDb().execute<BodySource>(sql`
    select ev.id as event_id, ev.type as event_type, null as test_payload, ev.payload::text as payload_text, ev.sequence, l.slug as lab, ev.created_at::text as event_at
    from ${events} ev join ${labs} l on l.id = ev.lab_id where ev.id = ${eventId}`)
  return row ? deliveryMessage(row, Infinity).body : null
}

/**
 * Standard Webhooks headers; during a rotation the previous secret signs too. The signature
 * is the spec's `v1,` + base64(HMAC-SHA256(secret, "{id}.{timestamp}.{body}")), computed with
 * node:crypto: the standardwebhooks package's pure-JavaScript HMAC was about 7 % of the
 * worker's time in bench:delivery. The tests verify every signature with that package.
 */
/** `fn` remembered by its argument, for at most 1,000 arguments at a time (then forgotten). */
function remembered<V>(fn: (key: string) => V): (key: string) => V {
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
  const { timeoutMs, maxPayloadBytes } = config()
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

/** A claimed delivery and its message, the body as the bytes to send (or why it has none). */
interface Queued { row: Claimed, message: Message, bytes: Buffer | null, unbuilt: string | null }

/**
 * The claimed deliveries with their messages. An event owed to several endpoints has one
 * message, built and encoded once per claim and shared by its deliveries (the body does
 * not depend on the endpoint; only the signature does).
 */
function withMessages(rows: Claimed[]): Queued[] {
  const { maxPayloadBytes } = config()
  const byEvent = new Map<string, Queued>()
  return rows.map((row) => {
    const shared = row.event_id ? byEvent.get(row.event_id) : undefined
    if (shared) return { ...shared, row }
    let queued: Queued
    try {
      const message = deliveryMessage(row, maxPayloadBytes)
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
interface Sent { row: Claimed, storedBody: string | null, headers: Record<string, string>, outcome: AttemptOutcome }

/** Signs and sends one claimed delivery; the database is not touched here, and it never throws. */
async function send({ row, message, bytes, unbuilt }: Queued): Promise<Sent> {
  const storedBody = message.kind === 'event' ? null : message.body
  try {
    if (!bytes) throw new Error(unbuilt ?? 'no message')
    const headers = signedHeaders(row.id, bytes, secretsOf(row))
    return { row, storedBody, headers, outcome: await sendOnce(row.url, headers, bytes) }
  }
  catch (error) {
    return { row, storedBody, headers: {}, outcome: { class: 'client-error', statusCode: null, error: `not sent: ${(error as Error).message}`, excerpt: null, retryAfterS: null, durationMs: 0 } }
  }
}

/** Ids as one uuid[] parameter (a list in Drizzle's `sql` would become one parameter per id). */
const uuidArray = (ids: string[]) => sql`${`{${ids.join(',')}}`}::uuid[]`

/**
 * Records a group of attempts and what follows each. One statement writes the deliveries
 * (only those this worker still leases), their attempts and the success of their endpoints;
 * when some failed, the same transaction then starts the endpoints' failure clocks and
 * disables where due.
 */
async function recordAttempts(sent: Sent[]) {
  if (!sent.length) return
  const { disableAfterMs } = config()
  const outcomes: Record<string, object> = {}
  const rows = sent.map(({ row, storedBody, headers, outcome }) => {
    const attempts = row.attempts + 1
    const gone = outcome.statusCode === 410
    const delay = outcome.class === 'success' || outcome.class === 'guard-refused' || gone ? null : nextDelaySeconds(attempts, outcome.retryAfterS)
    const status = outcome.class === 'success' ? 'succeeded' : delay === null ? 'dead' : 'pending'
    outcomes[row.id] = { attempts, status, delay, cls: outcome.class, code: outcome.statusCode, error: outcome.error, excerpt: outcome.excerpt, headers,
      // An event's whole message is not stored with every attempt: it is rebuilt from the event
      // when shown (eventMessageBody). Storing it was most of what recording an attempt cost.
      body: storedBody, duration: outcome.durationMs, replay: row.replay_requested }
    return { id: row.id, endpoint: row.endpoint_id, gone, cls: outcome.class }
  })
  const succeeded = [...new Set(rows.filter(r => r.cls === 'success').map(r => r.endpoint))]
  // Each row's outcome is looked up by its id in one JSON object, and the deliveries are found
  // by their ids: a join with the outcomes let the planner scan the whole table, once per
  // outcome, when its statistics said no row was leased (70 ms for 220 in bench:delivery).
  const write = (db: Queryable) => db.execute(sql`
    with o as (select ${JSON.stringify(outcomes)}::jsonb as by_id),
    upd as (
      update ${deliveries} d set (attempts, status, last_class, last_status_code, next_attempt_at, finished_at) = (
          select r.attempts, r.status, r.cls, r.code, case when r.delay is null then d.next_attempt_at else now() + make_interval(secs => r.delay) end,
            case when r.status = 'pending' then null else now() end
          from o, jsonb_to_record(o.by_id -> d.id::text) as r(attempts int, status delivery_status, delay float8, cls text, code int)),
        replay_requested = false, lease_owner = null, lease_until = null
      where d.id = any(${uuidArray(rows.map(r => r.id))}) and d.lease_owner = ${workerId}
      returning d.id, d.attempts),
    logged as (
      insert into ${deliveryAttempts} (delivery_id, number, duration_ms, class, status_code, error, response_excerpt, request_headers, request_body, replay)
      select upd.id, upd.attempts, r.duration, r.cls, r.code, r.error, r.excerpt, r.headers, r.body, r.replay
      from upd, o, jsonb_to_record(o.by_id -> upd.id::text) as r(cls text, code int, error text, excerpt text, headers jsonb, body text, duration int, replay boolean))
    update ${webhookEndpoints} e set failing_since = null
    where e.failing_since is not null and e.id = any(${uuidArray(succeeded)})`)
  const failing = [...new Set(rows.filter(r => r.cls !== 'success' && !r.gone).map(r => r.endpoint))]
  const gone = [...new Set(rows.filter(r => r.gone).map(r => r.endpoint))]
  if (!failing.length && !gone.length) {
    await write(useDb())
    return
  }
  await useDb().transaction(async (tx) => {
    await write(tx)
    if (failing.length) {
      const clocks = await tx.update(webhookEndpoints).set({ failingSince: sql`coalesce(${webhookEndpoints.failingSince}, now())` })
        .where(inArray(webhookEndpoints.id, failing)).returning({ id: webhookEndpoints.id, failingSince: webhookEndpoints.failingSince })
      for (const ep of clocks) {
        if (ep.failingSince && Date.now() - ep.failingSince.getTime() >= disableAfterMs) {
          await disableEndpoint(tx, ep.id, `no delivery succeeded for ${Math.round(disableAfterMs / 3600_000)} hours`)
        }
      }
    }
    for (const endpoint of gone) await disableEndpoint(tx, endpoint, 'the receiver answered 410 Gone')
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

/**
 * The worker of this process, as a pipeline: claims keep a short queue of leased deliveries
 * filled, `concurrency` sends stay in flight while there is work, and finished attempts are
 * recorded in groups, one statement at a time, while the sends go on. (Run in rounds of
 * claim, send all, record, the send slots stood idle while a round was claimed and recorded,
 * and every round waited for its slowest send: 0.2 of the bare sender's rate.)
 *
 * Claims and records are large: every statement wakes PostgreSQL, and the worker when it
 * answers, on cores that the app, PostgreSQL and the receivers share. Recording whatever had
 * finished (about 20 attempts a statement) and claiming 64 at a time cost 814–1,008 µs of
 * CPU per delivery in bench:delivery, all processes together; groups of at least 128 and
 * claims of 128 cost 628–800 µs (six runs each).
 */
class DeliveryPipeline {
  private queue: Queued[] = []
  private sending = 0
  private finished: Sent[] = []
  private claiming = false
  private recording = false
  private recordTimer: NodeJS.Timeout | undefined
  // A claim may find due work: the worker was woken, or the last claim came back full.
  private more = false
  private stopped = true
  private idle: (() => void)[] = []

  start() {
    this.stopped = false
    this.kick()
  }

  kick() {
    if (this.stopped) return
    this.more = true
    this.pump()
  }

  /** Stops claiming and sending, records what was sent, and hands back the rest of the queue. */
  async stop() {
    this.stopped = true
    await new Promise<void>((resolve) => {
      this.idle.push(resolve)
      this.settle()
    })
    this.queue = []
    await useDb().update(deliveries).set({ leaseOwner: null, leaseUntil: null })
      .where(and(eq(deliveries.leaseOwner, workerId), eq(deliveries.status, 'pending')))
  }

  private pump() {
    const { concurrency } = config()
    while (!this.stopped && this.sending < concurrency && this.queue.length) {
      this.sending++
      void send(this.queue.shift()!).then((sent) => {
        this.sending--
        this.finished.push(sent)
        this.record()
        this.pump()
      })
    }
    // The next claim runs while the last of the queue is sent, unless recording lags behind.
    const batch = concurrency * GROUP_PER_SLOT
    if (!this.stopped && this.more && !this.claiming && this.queue.length < concurrency * 2 && this.finished.length < batch * 4) {
      this.more = false
      this.claiming = true
      void this.claim(batch, concurrency)
    }
    this.settle()
  }

  private async claim(batch: number, concurrency: number) {
    const { timeoutMs, leaseSeconds } = config()
    // The lease covers the worst case: every delivery ahead of the batch's last one, and it,
    // timing out twice (p-retry's one retry), `concurrency` at a time.
    const ahead = this.queue.length + this.sending + batch
    const lease = Math.max(leaseSeconds, Math.ceil(ahead / concurrency) * Math.ceil((2 * timeoutMs + 200) / 1000) + 5)
    try {
      const rows = await claimDueDeliveries(batch, lease)
      this.queue.push(...withMessages(rows))
      // A claim can come back short of the batch while more is due (each endpoint offers only
      // its share), but not short of the least share.
      if (rows.length >= Math.min(batch, SHARE_MIN)) this.more = true
    }
    catch (error) {
      logError('[delivery] claiming failed; the next poll tries again', error)
    }
    this.claiming = false
    this.pump()
  }

  private record() {
    if (this.recording || !this.finished.length) return
    // A group waits (at most RECORD_WAIT_MS) to grow while sends are in flight; what finished
    // when nothing else is being sent, or when stopping, is recorded at once.
    if (this.finished.length < config().concurrency * GROUP_PER_SLOT && this.sending && !this.stopped) {
      this.recordTimer ??= setTimeout(() => {
        this.recordTimer = undefined
        this.recordNow()
      }, RECORD_WAIT_MS)
      return
    }
    this.recordNow()
  }

  private recordNow() {
    if (this.recording || !this.finished.length) return
    clearTimeout(this.recordTimer)
    this.recordTimer = undefined
    this.recording = true
    const group = this.finished.splice(0, RECORD_GROUP)
    recordAttempts(group)
      .catch(error => logError('[delivery] recording attempts failed; their leases run out and they are sent again', error))
      .finally(() => {
        this.recording = false
        this.record()
        this.pump()
      })
  }

  private settle() {
    if (this.stopped && !this.claiming && !this.sending && !this.recording && !this.finished.length) {
      for (const resolve of this.idle.splice(0)) resolve()
    }
  }
}

// A claim, and the group a record waits for, is this many deliveries per send slot (128 at
// the default concurrency of 16). At most RECORD_GROUP attempts are recorded by one
// statement, and a smaller group waits at most RECORD_WAIT_MS for more.
const GROUP_PER_SLOT = 8
const RECORD_GROUP = 256
const RECORD_WAIT_MS = 25

const worker = new DeliveryPipeline()
let timer: NodeJS.Timeout | undefined

/** Wakes the worker now (after an event was recorded) rather than at its next poll. */
export function kickDeliveries() {
  worker.kick()
}

export function startDeliveryWorker() {
  worker.start()
  timer = setInterval(kickDeliveries, Number(useRuntimeConfig().webhooks.pollMs))
  timer.unref()
}

/** Stops the worker: what is being sent is sent and recorded, and what it still holds is handed back. */
export async function stopDeliveryWorker() {
  clearInterval(timer)
  await worker.stop()
}
