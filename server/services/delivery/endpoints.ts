import { randomBytes } from 'node:crypto'
import { and, desc, eq, inArray, sql, type SQL } from 'drizzle-orm'
import { TEST_EVENT, type EndpointInput, type EndpointUpdate } from '#shared/schemas/webhooks'
import { deliveries, deliveryAttempts, events, grants, labs, partners, webhookEndpoints } from '../../database/schema'
import { consumePartnerAction } from '../access'
import { GuardRefusal } from './addressGuard'
import { checkOutboundUrlResolved } from './outbound'
import { deliveryMessage, signedHeaders } from './message'
import { secretsOf, sendOnce } from './send'
import { deliverySettings } from './settings'

// A partner's webhook endpoints. The signing secret is Standard Webhooks' `whsec_` + base64
// of 32 random bytes, sealed at rest, shown when made and on an explicit reveal.

const publicColumns = {
  id: webhookEndpoints.id, partnerId: webhookEndpoints.partnerId, url: webhookEndpoints.url, description: webhookEndpoints.description,
  eventTypes: webhookEndpoints.eventTypes, labIds: webhookEndpoints.labIds, schemaVersion: webhookEndpoints.schemaVersion,
  status: webhookEndpoints.status, disabledReason: webhookEndpoints.disabledReason, failingSince: webhookEndpoints.failingSince,
  previousSecretUntil: webhookEndpoints.previousSecretUntil,
  maxInFlight: webhookEndpoints.maxInFlight, ratePerSecond: webhookEndpoints.ratePerSecond, ordered: webhookEndpoints.ordered,
  consecutiveFailures: webhookEndpoints.consecutiveFailures, blockedUntil: webhookEndpoints.blockedUntil, createdAt: webhookEndpoints.createdAt, updatedAt: webhookEndpoints.updatedAt,
}

function newSecret() {
  return `whsec_${randomBytes(32).toString('base64')}`
}

/**
 * The final clause of a statement that records events (a CTE named `ev` returning their ids):
 * one delivery per endpoint that takes `eventType` from the event's lab (`lab`, an SQL
 * expression such as `ev.lab_id`), within the partner's grant. Paused endpoints collect
 * their deliveries and get them when resumed. An event that an older exchange-schema version
 * does not describe goes only to endpoints on `minSchemaVersion` or later.
 */
export function fanOut(eventType: string, lab: SQL, minSchemaVersion = 1): SQL {
  return sql`insert into ${deliveries} (endpoint_id, event_id, event_type)
    select e.id, ev.id, ${eventType} from ev
    join ${webhookEndpoints} e on e.status in ('active', 'paused') and ${eventType} = any(e.event_types)
      and (cardinality(e.lab_ids) = 0 or ${lab} = any(e.lab_ids)) and e.schema_version >= ${minSchemaVersion}
    join ${grants} g on g.partner_id = e.partner_id and g.lab_id = ${lab} and ${eventType} = any(g.event_types)`
}

/**
 * Records one event of lab `labId` in the caller's transaction (or alone) with the deliveries
 * it owes: the lab's next event number is taken under its row's lock, as accepted
 * acquisitions' events are (ingest/acceptedWrites.ts), so the pull feed's per-lab cursor
 * never skips one. The caller kicks the delivery worker after its commit.
 */
export async function recordLabEvent(db: Queryable, labId: string, eventType: string, data: unknown, minSchemaVersion = 1) {
  await db.execute(sql`
    with seq as (
      update ${labs} set event_sequence = event_sequence + 1 where id = ${labId} returning id as lab_id, event_sequence as last),
    ev as (
      insert into ${events} (lab_id, sequence, type, payload)
      select lab_id, last, ${eventType}, ${JSON.stringify(data)}::jsonb from seq
      returning id, lab_id)
    ${fanOut(eventType, sql`ev.lab_id`, minSchemaVersion)}`)
}

async function checkUrlField(url: string) {
  try { await checkOutboundUrlResolved(url) }
  catch (error) {
    if (error instanceof GuardRefusal) throw fieldProblem('url', error.message)
    throw error
  }
}

async function checkLabsGranted(partnerId: string, labIds: string[]) {
  if (!labIds.length) return
  const granted = new Set((await useDb().select({ labId: grants.labId }).from(grants)
    .where(and(eq(grants.partnerId, partnerId), inArray(grants.labId, labIds)))).map(g => g.labId))
  const i = labIds.findIndex(id => !granted.has(id))
  if (i >= 0) throw fieldProblem(`labIds.${i}`, 'this lab has not granted your partner access to its results')
}

/** The per-endpoint limits within the bounds the hub's admins set (runtime config). */
function checkLimits(input: { maxInFlight?: number | null, ratePerSecond?: number | null }) {
  const { endpointMaxInFlight, endpointMaxRatePerSecond } = deliverySettings()
  if (input.maxInFlight != null && input.maxInFlight > endpointMaxInFlight) throw fieldProblem('maxInFlight', `may be at most ${endpointMaxInFlight} on this hub`)
  if (input.ratePerSecond != null && input.ratePerSecond > endpointMaxRatePerSecond) throw fieldProblem('ratePerSecond', `may be at most ${endpointMaxRatePerSecond} a second on this hub`)
}

async function checkSchemaVersion(version: number) {
  const row = await useDb().query.exchangeSchemas.findFirst({ where: (s, { and, eq }) => and(eq(s.name, 'result-event'), eq(s.version, version)) })
  if (!row || row.status === 'retired') throw fieldProblem('schemaVersion', `no current result-event schema v${version}`)
}

export function listEndpoints(partnerId: string) {
  return useDb().select(publicColumns).from(webhookEndpoints).where(eq(webhookEndpoints.partnerId, partnerId)).orderBy(desc(webhookEndpoints.createdAt), desc(webhookEndpoints.id))
}

export async function getEndpoint(partnerId: string, endpointId: string) {
  const [row] = await useDb().select(publicColumns).from(webhookEndpoints).where(and(eq(webhookEndpoints.id, endpointId), eq(webhookEndpoints.partnerId, partnerId)))
  if (!row) throw problem(404, 'endpoint-not-found', 'No such webhook endpoint for this partner.')
  return row
}

export async function createEndpoint(audit: AuditContext, partnerId: string, input: EndpointInput) {
  checkLimits(input)
  await checkUrlField(input.url)
  await checkLabsGranted(partnerId, input.labIds)
  await checkSchemaVersion(input.schemaVersion)
  const secret = newSecret()
  return useDb().transaction(async (tx) => {
    // The partner's row lock makes the count and the insert one step: creates racing past
    // the cap wait here and then count the endpoint made before them.
    await tx.select({ id: partners.id }).from(partners).where(eq(partners.id, partnerId)).for('update')
    const max = Number(useRuntimeConfig().webhooks.maxEndpointsPerPartner)
    const [{ count }] = await tx.select({ count: sql<number>`count(*)::int` }).from(webhookEndpoints).where(eq(webhookEndpoints.partnerId, partnerId)) as [{ count: number }]
    if (count >= max) throw problem(409, 'endpoint-limit-reached', `This partner has ${count} webhook endpoints, the most allowed (${max}); delete one before adding another.`)
    const row = firstRow(await tx.insert(webhookEndpoints).values({ partnerId, ...input, sealedSecret: seal(secret), createdBy: audit.actor.id }).returning(publicColumns))
    await recordAudit(tx, { ...audit, action: 'endpoint.created', targetType: 'webhook-endpoint', targetId: row.id, detail: { partnerId, url: input.url, eventTypes: input.eventTypes } })
    // The secret is in this answer and in an explicit reveal, nowhere else.
    return { ...row, secret }
  })
}

export async function updateEndpoint(audit: AuditContext, partnerId: string, endpointId: string, input: EndpointUpdate) {
  const current = await getEndpoint(partnerId, endpointId)
  checkLimits(input)
  if (input.url) await checkUrlField(input.url)
  if (input.labIds) await checkLabsGranted(partnerId, input.labIds)
  if (input.schemaVersion) await checkSchemaVersion(input.schemaVersion)
  return useDb().transaction(async (tx) => {
    const resumed = input.status === 'active' && current.status !== 'active'
    const [row] = await tx.update(webhookEndpoints).set({
      ...input, updatedAt: new Date(), ...(resumed ? { disabledReason: null, failingSince: null, consecutiveFailures: 0, blockedUntil: null } : {}),
    }).where(and(eq(webhookEndpoints.id, endpointId), eq(webhookEndpoints.partnerId, partnerId))).returning(publicColumns)
    const action = input.status && input.status !== current.status ? (input.status === 'paused' ? 'endpoint.paused' : 'endpoint.resumed') : 'endpoint.updated'
    await recordAudit(tx, { ...audit, action, targetType: 'webhook-endpoint', targetId: endpointId, detail: { partnerId, ...input } })
    if (resumed) kickDeliveries()
    return row!
  })
}

export async function deleteEndpoint(audit: AuditContext, partnerId: string, endpointId: string) {
  const row = await getEndpoint(partnerId, endpointId)
  await useDb().transaction(async (tx) => {
    await tx.delete(webhookEndpoints).where(eq(webhookEndpoints.id, endpointId))
    await recordAudit(tx, { ...audit, action: 'endpoint.deleted', targetType: 'webhook-endpoint', targetId: endpointId, detail: { partnerId, url: row.url } })
  })
}

/** The signing secret(s) in force, on an explicit request that the audit log records. */
export async function revealSecret(audit: AuditContext, partnerId: string, endpointId: string) {
  const row = await useDb().query.webhookEndpoints.findFirst({ where: and(eq(webhookEndpoints.id, endpointId), eq(webhookEndpoints.partnerId, partnerId)) })
  if (!row) throw problem(404, 'endpoint-not-found', 'No such webhook endpoint for this partner.')
  await recordAudit(useDb(), { ...audit, action: 'endpoint.secret-revealed', targetType: 'webhook-endpoint', targetId: endpointId, detail: { partnerId } })
  const previous = row.previousSealedSecret && row.previousSecretUntil && row.previousSecretUntil > new Date()
    ? { secret: unseal(row.previousSealedSecret), until: row.previousSecretUntil.toISOString() }
    : null
  return { secret: unseal(row.sealedSecret), previous }
}

/** A new secret; the old one keeps signing beside it for `overlapHours`. */
export async function rotateSecret(audit: AuditContext, partnerId: string, endpointId: string, overlapHours: number) {
  const secret = newSecret()
  const until = new Date(Date.now() + overlapHours * 3600_000)
  return useDb().transaction(async (tx) => {
    const [row] = await tx.update(webhookEndpoints).set({
      sealedSecret: seal(secret), previousSealedSecret: sql`${webhookEndpoints.sealedSecret}`, previousSecretUntil: until, updatedAt: new Date(),
    }).where(and(eq(webhookEndpoints.id, endpointId), eq(webhookEndpoints.partnerId, partnerId))).returning(publicColumns)
    if (!row) throw problem(404, 'endpoint-not-found', 'No such webhook endpoint for this partner.')
    await recordAudit(tx, { ...audit, action: 'endpoint.secret-rotated', targetType: 'webhook-endpoint', targetId: endpointId, detail: { partnerId, overlapHours } })
    return { ...row, secret, previousSecretUntil: until }
  })
}

/**
 * Sends a test message now and answers how it went. It is logged as a delivery of type
 * `webhook.test` (no retries: the person who asked is looking at the answer).
 */
export async function sendTestEvent(audit: AuditContext, partnerId: string, endpointId: string) {
  const ep = await useDb().query.webhookEndpoints.findFirst({ where: and(eq(webhookEndpoints.id, endpointId), eq(webhookEndpoints.partnerId, partnerId)) })
  if (!ep) throw problem(404, 'endpoint-not-found', 'No such webhook endpoint for this partner.')
  await consumePartnerAction('test-send', partnerId)
  const partner = await useDb().query.partners.findFirst({ where: eq(partners.id, partnerId), columns: { slug: true } })
  const testPayload = { message: 'A test message from Arcwise: your endpoint received and can verify it.', partner: partner?.slug, endpointId, sentBy: audit.actor.label }
  const delivery = firstRow(await useDb().insert(deliveries).values({ endpointId, eventType: TEST_EVENT, testPayload, status: 'pending', nextAttemptAt: sql`'infinity'::timestamptz` })
    // As text: a Date would lose the microseconds of the partition key the attempt must repeat.
    .returning({ id: deliveries.id, createdAt: sql<string>`${deliveries.createdAt}::text` }))
  const { body } = deliveryMessage({ event_type: TEST_EVENT, test_payload: testPayload, payload_text: null, sequence: null, lab: null, event_at: null, event_id: null }, Infinity, '')
  const headers = signedHeaders(delivery.id, body, secretsOf({ sealed_secret: ep.sealedSecret, previous_sealed_secret: ep.previousSealedSecret, previous_secret_until: ep.previousSecretUntil?.toISOString() ?? null }))
  const outcome = await sendOnce(ep.url, headers, body)
  const ok = outcome.class === 'success'
  await useDb().transaction(async (tx) => {
    await tx.update(deliveries).set({ attempts: 1, status: ok ? 'succeeded' : 'dead', lastClass: outcome.class, lastStatusCode: outcome.statusCode, finishedAt: new Date() }).where(and(eq(deliveries.id, delivery.id), eq(deliveries.createdAt, sql`${delivery.createdAt}::timestamptz`)))
    await tx.insert(deliveryAttempts).values({ deliveryId: delivery.id, deliveryCreatedAt: sql`${delivery.createdAt}::timestamptz`, number: 1, durationMs: outcome.durationMs, class: outcome.class, statusCode: outcome.statusCode, error: outcome.error, responseExcerpt: outcome.excerpt, requestHeaders: headers, requestBody: body })
  })
  return { deliveryId: delivery.id, ok, class: outcome.class, statusCode: outcome.statusCode, durationMs: outcome.durationMs, error: outcome.error, responseExcerpt: outcome.excerpt }
}
