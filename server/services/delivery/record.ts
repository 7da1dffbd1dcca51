import { and, eq, inArray, sql } from 'drizzle-orm'
import { deliveries, deliveryAttempts, partners, users, webhookEndpoints } from '../../database/schema'
import { linkMail, queueMail } from '../mail'
import { observeDeliveryAttempt } from '../metrics'
import { endpointHealth, noSuccessReason } from './health'
import { nextDelaySeconds } from './retry'
import type { Sent } from './send'
import { deliverySettings, workerId } from './settings'

// Phase three of the worker: the attempts recorded, what follows each scheduled, and
// endpoints that keep failing (or answer 410) disabled with their owners told.

/** Ids as one uuid[] parameter (a list in Drizzle's `sql` would become one parameter per id). */
const uuidArray = (ids: string[]) => sql`${`{${ids.join(',')}}`}::uuid[]`

/**
 * Records a group of attempts and what follows each. One statement writes the deliveries
 * (only those this worker still leases), their attempts and the success of their endpoints;
 * when some failed, the same transaction then starts the endpoints' failure clocks and
 * disables where due.
 */
export async function recordAttempts(sent: Sent[]) {
  if (!sent.length) return
  const { disableAfterMs, schedule, circuitFailures, circuitProbeSeconds } = deliverySettings()
  const outcomes: Record<string, object> = {}
  const rows = sent.map(({ row, storedBody, headers, outcome }) => {
    const attempts = row.attempts + 1
    const gone = outcome.statusCode === 410
    const delay = outcome.class === 'success' || outcome.class === 'guard-refused' || gone ? null : nextDelaySeconds(attempts, outcome.retryAfterS, schedule)
    const status = outcome.class === 'success' ? 'succeeded' : delay === null ? 'dead' : 'pending'
    outcomes[row.id] = { attempts, status, delay, cls: outcome.class, code: outcome.statusCode, error: outcome.error, excerpt: outcome.excerpt, headers,
      // An event's whole message is not stored with every attempt: it is rebuilt from the event
      // when shown (eventMessageBody). Storing it was most of what recording an attempt cost.
      body: storedBody, duration: outcome.durationMs, replay: row.replay_requested }
    return { id: row.id, endpoint: row.endpoint_id, gone, cls: outcome.class }
  })
  for (const { outcome } of sent) observeDeliveryAttempt(outcome.class, outcome.durationMs / 1000)
  // One line per attempt, with the request id of the acquisition it carries. A row whose lease
  // ran out before this record is not written here; the worker that took it logs its own.
  const log = useLog()
  const logRecorded = () => {
    if (!log.isLevelEnabled('info')) return
    for (const { row, outcome } of sent) {
      const o = outcomes[row.id] as { attempts: number, status: string, delay: number | null }
      log.info({ reqId: row.request_id, deliveryId: row.id, endpointId: row.endpoint_id, eventId: row.event_id, attempt: o.attempts, status: o.status, class: outcome.class, statusCode: outcome.statusCode, retryInSeconds: o.delay }, 'delivery recorded')
    }
  }
  const health = endpointHealth(sent)
  const createdAts = sql`${`{${sent.map(({ row }) => `"${row.created_at}"`).join(',')}}`}::timestamptz[]`
  // Each row's outcome is looked up by its id in one JSON object, and the deliveries are found
  // by their ids: a join with the outcomes let the planner scan the whole table, once per
  // outcome, when its statistics said no row was leased (bench:delivery; DEVELOPERS.md, Measured).
  const write = (db: Queryable) => db.execute(sql`
    with o as (select ${JSON.stringify(outcomes)}::jsonb as by_id),
    upd as (
      update ${deliveries} d set (attempts, status, last_class, last_status_code, next_attempt_at, finished_at) = (
          select r.attempts, r.status, r.cls, r.code, case when r.delay is null then d.next_attempt_at else now() + make_interval(secs => r.delay) end,
            case when r.status = 'pending' then null else now() end
          from o, jsonb_to_record(o.by_id -> d.id::text) as r(attempts int, status delivery_status, delay float8, cls text, code int)),
        replay_requested = false, lease_owner = null, lease_until = null
      where d.id = any(${uuidArray(rows.map(r => r.id))}) and d.lease_owner = ${workerId}
        -- Only the months the rows were created in are searched (partitions by created_at; see claim.ts).
        and d.created_at between (select min(t) from unnest(${createdAts}) t) and (select max(t) from unnest(${createdAts}) t)
      returning d.id, d.attempts, d.created_at),
    logged as (
      -- An attempt sits in its delivery's month (delivery_created_at, the partition key).
      insert into ${deliveryAttempts} (delivery_id, delivery_created_at, number, duration_ms, class, status_code, error, response_excerpt, request_headers, request_body, replay)
      select upd.id, upd.created_at, upd.attempts, r.duration, r.cls, r.code, r.error, r.excerpt, r.headers, r.body, r.replay
      from upd, o, jsonb_to_record(o.by_id -> upd.id::text) as r(cls text, code int, error text, excerpt text, headers jsonb, body text, duration int, replay boolean)),
    h as (select * from jsonb_to_recordset(${JSON.stringify(health)}::jsonb) as h(id uuid, ok boolean, failures int, retry_failures int, wait float8)),
    -- The endpoints this changes, locked in id order: records and claims in other processes
    -- lock endpoints in the same order, so they cannot deadlock. FOR NO KEY UPDATE, not FOR
    -- UPDATE: ingest's fan-out takes FOR KEY SHARE on endpoint rows (the deliveries' foreign
    -- key) in its own order, and FOR UPDATE waited for it, a deadlock (DEVELOPERS.md, Measured).
    locked as (
      select e.id from ${webhookEndpoints} e join h on h.id = e.id
      where not h.ok or h.wait is not null or e.failing_since is not null or e.consecutive_failures > 0
      order by e.id for no key update of e),
    -- A success closes the circuit; failures of first tries count towards opening it (a
    -- retry's too at an ordered endpoint, whose head is all it sends; see endpointHealth), and
    -- any failure once it is open waits a probe interval; Retry-After blocks the endpoint until then.
    counted as (select h.id, case when e.ordered then h.failures + h.retry_failures else h.failures end as failures
      from h join ${webhookEndpoints} e on e.id = h.id)
    update ${webhookEndpoints} e set
      failing_since = case when h.ok then null else e.failing_since end,
      consecutive_failures = case when h.ok then 0 else e.consecutive_failures + c.failures end,
      blocked_until = greatest(e.blocked_until,
        case when h.wait is not null then now() + make_interval(secs => h.wait) end,
        case when not h.ok and e.consecutive_failures + c.failures >= ${circuitFailures} then now() + make_interval(secs => ${circuitProbeSeconds}) end)
    from h join counted c on c.id = h.id where e.id = h.id and e.id = any(array(select id from locked))`)
  // Endpoints without a success in this group: their failure clocks start (if not running).
  const failing = health.filter(h => !h.ok && rows.some(r => r.endpoint === h.id && r.cls !== 'success' && !r.gone)).map(h => h.id)
  const gone = [...new Set(rows.filter(r => r.gone).map(r => r.endpoint))]
  if (!failing.length && !gone.length) {
    await write(useDb())
    logRecorded()
    return
  }
  await useDb().transaction(async (tx) => {
    await write(tx)
    if (failing.length) {
      const clocks = await tx.update(webhookEndpoints).set({ failingSince: sql`coalesce(${webhookEndpoints.failingSince}, now())` })
        .where(inArray(webhookEndpoints.id, failing)).returning({ id: webhookEndpoints.id, failingSince: webhookEndpoints.failingSince })
      for (const ep of clocks) {
        if (ep.failingSince && Date.now() - ep.failingSince.getTime() >= disableAfterMs) {
          await disableEndpoint(tx, ep.id, noSuccessReason(disableAfterMs))
        }
      }
    }
    for (const endpoint of gone) await disableEndpoint(tx, endpoint, 'the receiver answered 410 Gone')
  })
  logRecorded()
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
 * Deliveries still waiting for a disabled endpoint become dead, as disableEndpoint makes them.
 * One can commit after disableEndpoint's update: ingest's fan-out read the endpoint as active
 * in its own snapshot, and its foreign-key lock (FOR KEY SHARE) does not wait for a status
 * change. No claim reads a disabled endpoint, so such a row waited for a resume that may never
 * come (`npm run chaos`, one of 101,440 deliveries, 2026-12-03). Worker processes run this at
 * start and then every minute (worker.ts); the partial index on pending rows keeps it cheap.
 */
export async function buryLateDeliveries() {
  const rows = await useDb().execute<{ id: string }>(sql`
    update ${deliveries} d set status = 'dead', finished_at = now(), lease_owner = null, lease_until = null
    where d.status = 'pending' and d.endpoint_id = any(array(select e.id from ${webhookEndpoints} e where e.status = 'disabled'))
    returning d.id`)
  if (rows.length) useLog().warn({ deliveries: rows.length }, 'deliveries of disabled endpoints made dead')
}

