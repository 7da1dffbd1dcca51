import { stringify } from 'csv-stringify/sync'
import { and, asc, desc, eq, gte, lte, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { deliveryFilter, deliveryListQuery, replayFilter } from '#shared/schemas/webhooks'
import { deliveries, deliveryAttempts, events, labs, webhookEndpoints } from '../../database/schema'
import { consumePartnerAction } from '../access'
import { deliveryMessage, type BodySource } from './message'
import { deliverySettings } from './settings'
import { stopReason } from './verdicts'
import { kickDeliveries } from './worker'

// The delivery log of a partner: every delivery to its endpoints with its attempts, and
// replays. "failing" is a delivery still pending after at least one failed attempt.

function filterConditions(partnerId: string, f: z.output<typeof deliveryFilter>): (SQL | undefined)[] {
  const c: (SQL | undefined)[] = [eq(webhookEndpoints.partnerId, partnerId)]
  if (f.endpoint) c.push(eq(deliveries.endpointId, f.endpoint))
  if (f.status === 'failing') c.push(and(eq(deliveries.status, 'pending'), sql`${deliveries.attempts} > 0`))
  else if (f.status) c.push(eq(deliveries.status, f.status))
  if (f.eventType) c.push(eq(deliveries.eventType, f.eventType))
  if (f.from) c.push(gte(deliveries.createdAt, new Date(f.from)))
  if (f.to) c.push(lte(deliveries.createdAt, new Date(f.to)))
  return c
}

/** Newest first, in cursor pages. */
export async function listDeliveries(partnerId: string, query: z.output<typeof deliveryListQuery>) {
  const conditions = filterConditions(partnerId, query)
  if (query.cursor) conditions.push(afterCursor(query.cursor, deliveries.createdAt, deliveries.id))
  const rows = await useDb().select({
    id: deliveries.id, endpointId: deliveries.endpointId, url: webhookEndpoints.url, eventType: deliveries.eventType, eventId: deliveries.eventId,
    lab: labs.slug, sequence: events.sequence, status: deliveries.status, attempts: deliveries.attempts, lastClass: deliveries.lastClass,
    lastStatusCode: deliveries.lastStatusCode, nextAttemptAt: deliveries.nextAttemptAt, createdAt: deliveries.createdAt, finishedAt: deliveries.finishedAt,
    at: sql<string>`${deliveries.createdAt}::text`,
  }).from(deliveries).innerJoin(webhookEndpoints, eq(webhookEndpoints.id, deliveries.endpointId))
    .leftJoin(events, eq(events.id, deliveries.eventId)).leftJoin(labs, eq(labs.id, events.labId))
    .where(and(...conditions)).orderBy(desc(deliveries.createdAt), desc(deliveries.id)).limit(query.limit + 1)
  const { items, nextCursor } = cursorPage(rows, query.limit)
  return {
    items: items.map(({ at: _at, ...r }) => ({ ...r, state: r.status === 'pending' && r.attempts > 0 ? 'failing' as const : r.status, sequence: r.sequence === null ? null : Number(r.sequence), nextAttemptAt: r.status === 'pending' ? r.nextAttemptAt : null })),
    nextCursor,
  }
}

const CSV_ROWS = 10_000

/** The filtered log as CSV, newest first, at most CSV_ROWS rows. */
export async function deliveryLogCsv(partnerId: string, filter: z.output<typeof deliveryFilter>) {
  const rows: Awaited<ReturnType<typeof listDeliveries>>['items'] = []
  let cursor: string | undefined
  do {
    const page = await listDeliveries(partnerId, { ...filter, limit: 200, cursor })
    rows.push(...page.items)
    cursor = page.nextCursor ?? undefined
  } while (cursor && rows.length < CSV_ROWS)
  return stringify(rows.slice(0, CSV_ROWS).map(r => [
    r.id, r.createdAt.toISOString(), r.eventType, r.lab ?? '', r.sequence ?? '', r.url, r.state, r.attempts, r.lastClass ?? '', r.lastStatusCode ?? '',
    r.nextAttemptAt?.toISOString() ?? '', r.finishedAt?.toISOString() ?? '',
  ]), { header: true, columns: ['webhook_id', 'created_at', 'event_type', 'lab', 'sequence', 'url', 'status', 'attempts', 'last_class', 'last_status_code', 'next_attempt_at', 'finished_at'] })
}

/** An event's whole message as the worker sent it, for an attempt that did not store its body. */
export async function eventMessageBody(eventId: string): Promise<string | null> {
  const [row] = await useDb().execute<BodySource>(sql`
    select ev.id as event_id, ev.type as event_type, null as test_payload, ev.payload::text as payload_text, ev.sequence, l.slug as lab, ev.created_at::text as event_at
    from ${events} ev join ${labs} l on l.id = ev.lab_id where ev.id = ${eventId}`)
  return row ? deliveryMessage(row, Infinity, '').body : null
}

/** One delivery of the partner with every attempt, oldest first. */
export async function getDelivery(partnerId: string, deliveryId: string) {
  const [row] = await useDb().select({ d: deliveries, url: webhookEndpoints.url, endpoint: {
    status: webhookEndpoints.status, disabledReason: webhookEndpoints.disabledReason, blockedUntil: webhookEndpoints.blockedUntil, consecutiveFailures: webhookEndpoints.consecutiveFailures } }).from(deliveries)
    .innerJoin(webhookEndpoints, eq(webhookEndpoints.id, deliveries.endpointId))
    .where(and(eq(deliveries.id, deliveryId), eq(webhookEndpoints.partnerId, partnerId)))
  if (!row) throw problem(404, 'delivery-not-found', 'No such delivery for this partner.')
  const attempts = await useDb().select().from(deliveryAttempts).where(eq(deliveryAttempts.deliveryId, deliveryId)).orderBy(asc(deliveryAttempts.number), asc(deliveryAttempts.id))
  const { leaseOwner: _o, leaseUntil: _u, testPayload: _t, ...d } = row.d
  const eventBody = d.eventId && attempts.some(a => a.requestBody === null) ? await eventMessageBody(d.eventId) : null
  const last = attempts.at(-1)
  // Why it stopped (or what it waits for), in one sentence from what is recorded.
  const why = stopReason({ ...d, last: last ? { class: last.class, statusCode: last.statusCode, error: last.error } : null, endpoint: row.endpoint }, deliverySettings())
  return { ...d, url: row.url, endpointStatus: row.endpoint.status, why, attempts: attempts.map(({ deliveryId: _d, deliveryCreatedAt: _c, ...a }) => ({ ...a, requestBody: a.requestBody ?? eventBody ?? '' })) }
}

// A replay is a new attempt of the same message (same webhook-id), due now.
const replaySet = { status: 'pending' as const, replayRequested: true, nextAttemptAt: sql`now()`, finishedAt: null, leaseOwner: null, leaseUntil: null }

export async function replayDelivery(audit: AuditContext, partnerId: string, deliveryId: string) {
  const replayable = sql`${deliveries.eventId} is not null and (${deliveries.status} = 'dead' or (${deliveries.status} = 'pending' and ${deliveries.attempts} > 0))`
  const ownedBy = sql`${deliveries.endpointId} in (select id from ${webhookEndpoints} where partner_id = ${partnerId}::uuid)`
  // Only a replay that will happen counts against the partner's allowance: ids that name
  // nothing, or deliveries that cannot be replayed, are refused before it is consumed.
  const [own] = await useDb().select({ replayable: sql<boolean>`${replayable}` }).from(deliveries).where(and(eq(deliveries.id, deliveryId), ownedBy))
  if (!own) throw problem(404, 'delivery-not-found', 'No such delivery for this partner.')
  const notReplayable = () => problem(409, 'not-replayable', 'Only failing or dead deliveries of events can be replayed; this one succeeded or has not been tried yet.')
  if (!own.replayable) throw notReplayable()
  await consumePartnerAction('replay', partnerId)
  const [row] = await useDb().update(deliveries).set(replaySet).where(and(eq(deliveries.id, deliveryId), replayable, ownedBy)).returning({ id: deliveries.id })
  if (!row) throw notReplayable() // it was replayed or finished in the meantime
  await recordAudit(useDb(), { ...audit, action: 'delivery.replayed', targetType: 'delivery', targetId: deliveryId, detail: { partnerId } })
  kickDeliveries()
  return { replayed: 1 }
}

export async function replayMatching(audit: AuditContext, partnerId: string, filter: z.output<typeof replayFilter>) {
  await consumePartnerAction('replay', partnerId)
  const conditions = filterConditions(partnerId, filter)
  const rows = await useDb().update(deliveries).set(replaySet)
    .where(sql`${deliveries.id} in (select ${deliveries.id} from ${deliveries} join ${webhookEndpoints} on ${webhookEndpoints.id} = ${deliveries.endpointId}
      where ${and(...conditions)} and ${deliveries.eventId} is not null)`)
    .returning({ id: deliveries.id })
  await recordAudit(useDb(), { ...audit, action: 'delivery.replayed', targetType: 'partner', targetId: partnerId, detail: { ...filter, count: rows.length } })
  kickDeliveries()
  return { replayed: rows.length }
}
