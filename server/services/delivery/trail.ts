import { sql } from 'drizzle-orm'
import { acquisitions } from '../../database/schema'
import { eventMessageBody } from './log'
import { deliveryMessage, type BodySource } from './message'
import { deliverySettings } from './settings'
import { checkRecordedSignature, signatureSentence, stopReason } from './verdicts'

// A result's delivery trail: every event its versions raised (released, corrected, retracted),
// each with the deliveries it owed (partner, endpoint, state, attempts, webhook-id), whether
// the last attempt's recorded signature verifies against the endpoint's secret now, and why
// a delivery stopped. Partners the lab grants that no endpoint of theirs took the event for
// are named too: they read the result by API.

const RESULT_EVENTS = ['result.released', 'result.corrected', 'result.retracted']

/** Events' whole messages as the worker sent them (attempts that sent one stored no body), in one statement. */
async function eventMessageBodies(eventIds: string[]): Promise<Map<string, string>> {
  if (!eventIds.length) return new Map()
  const rows = await useDb().execute<BodySource>(sql`
    select ev.id as event_id, ev.type as event_type, null as test_payload, ev.payload::text as payload_text, ev.sequence, l.slug as lab, ev.created_at::text as event_at
    from events ev join labs l on l.id = ev.lab_id where ev.id = any(${`{${eventIds.join(',')}}`}::uuid[])`)
  return new Map(rows.map(r => [r.event_id!, deliveryMessage(r, Infinity, '').body]))
}

/** The secrets an endpoint signs with now: the current one, and the previous one during a rotation's overlap. */
function secretsNow(r: { sealed_secret: string, previous_sealed_secret: string | null, previous_secret_until: Date | string | null }) {
  const previous = r.previous_sealed_secret && r.previous_secret_until && new Date(r.previous_secret_until) > new Date() ? unseal(r.previous_sealed_secret) : null
  return { current: unseal(r.sealed_secret), previous }
}

type TrailRow = {
  event_id: string, type: string, event_at: Date, sequence: string, result_id: string | null, version: number | null
  delivery_id: string | null, status: 'pending' | 'succeeded' | 'dead' | null, attempts: number | null, next_attempt_at: Date | null, finished_at: Date | null
  endpoint_id: string | null, url: string | null, endpoint_status: 'active' | 'paused' | 'disabled' | null, disabled_reason: string | null
  blocked_until: Date | null, consecutive_failures: number | null, sealed_secret: string | null, previous_sealed_secret: string | null, previous_secret_until: Date | null
  partner_id: string | null, partner: string | null
  last_class: string | null, last_status_code: number | null, last_error: string | null, last_at: Date | null, last_headers: Record<string, string> | null, last_body: string | null
}

/** The trail of one acquisition of the lab; another lab's acquisition is not found. */
export async function deliveryTrail(labId: string, acquisitionId: string) {
  const db = useDb()
  const [own] = await db.select({ id: acquisitions.id }).from(acquisitions).where(sql`${acquisitions.id} = ${acquisitionId}::uuid and ${acquisitions.labId} = ${labId}::uuid`)
  if (!own) throw problem(404, 'acquisition-not-found', 'No such acquisition in this lab.')
  const rows = await db.execute<TrailRow>(sql`
    select ev.id as event_id, ev.type, ev.created_at as event_at, ev.sequence::text as sequence,
      r.id as result_id, r.version,
      d.id as delivery_id, d.status, d.attempts, d.next_attempt_at, d.finished_at,
      e.id as endpoint_id, e.url, e.status as endpoint_status, e.disabled_reason, e.blocked_until, e.consecutive_failures,
      e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until,
      p.id as partner_id, p.name as partner,
      la.class as last_class, la.status_code as last_status_code, la.error as last_error, la.at as last_at, la.request_headers as last_headers, la.request_body as last_body
    from events ev
    left join results r on r.id::text = coalesce(ev.payload->'result'->>'id', ev.payload->>'resultId')
    left join deliveries d on d.event_id = ev.id
    left join webhook_endpoints e on e.id = d.endpoint_id
    left join partners p on p.id = e.partner_id
    left join lateral (select a.class, a.status_code, a.error, a.at, a.request_headers, a.request_body from delivery_attempts a
      where a.delivery_id = d.id order by a.number desc, a.id desc limit 1) la on true
    where ev.lab_id = ${labId}::uuid and ev.payload->>'id' = ${acquisitionId} and ev.type = any(${`{${RESULT_EVENTS.join(',')}}`}::text[])
    order by ev.sequence, p.name, e.url`)
  const granted = await db.execute<{ id: string, name: string, event_types: string[] }>(sql`
    select p.id, p.name, g.event_types from grants g join partners p on p.id = g.partner_id where g.lab_id = ${labId}::uuid order by p.name`)
  const settings = deliverySettings()
  const events = new Map<string, { eventId: string, type: string, at: string, resultId: string | null, version: number | null, deliveries: ReturnType<typeof deliveryOf>[], byApi: { id: string, name: string }[] }>()
  const bodies = await eventMessageBodies([...new Set(rows.filter(r => r.last_headers && r.last_body === null).map(r => r.event_id))])
  for (const r of rows) {
    let ev = events.get(r.event_id)
    if (!ev) events.set(r.event_id, ev = { eventId: r.event_id, type: r.type, at: new Date(r.event_at).toISOString(), resultId: r.result_id, version: r.version, deliveries: [], byApi: [] })
    if (!r.delivery_id) continue
    ev.deliveries.push(deliveryOf(r, r.last_body ?? bodies.get(r.event_id) ?? null, settings))
  }
  for (const ev of events.values()) {
    const reached = new Set(ev.deliveries.map(d => d.partnerId))
    ev.byApi = granted.filter(g => g.event_types.includes(ev.type) && !reached.has(g.id)).map(g => ({ id: g.id, name: g.name }))
  }
  return { items: [...events.values()] }
}

function deliveryOf(r: TrailRow, body: string | null, settings: ReturnType<typeof deliverySettings>) {
  const last = r.last_class ? { class: r.last_class, statusCode: r.last_status_code, error: r.last_error } : null
  const state = r.status === 'pending' && r.attempts! > 0 ? 'failing' as const : r.status!
  let signature: { verdict: string, sentence: string } | null = null
  if (r.last_headers && body !== null) {
    const verdict = checkRecordedSignature(r.last_headers, body, secretsNow({ ...r, sealed_secret: r.sealed_secret! }))
    signature = { verdict, sentence: signatureSentence(verdict) }
  }
  return {
    id: r.delivery_id!, webhookId: r.delivery_id!, partnerId: r.partner_id!, partner: r.partner!, endpointId: r.endpoint_id!, url: r.url!, endpointStatus: r.endpoint_status!,
    state, attempts: r.attempts!, lastAttemptAt: r.last_at ? new Date(r.last_at).toISOString() : null,
    deliveredAt: r.status === 'succeeded' && r.finished_at ? new Date(r.finished_at).toISOString() : null,
    lastAnswer: last ? (last.statusCode ? `HTTP ${last.statusCode}` : last.class) : null,
    signature,
    why: stopReason({
      status: r.status!, eventId: r.event_id, attempts: r.attempts!, nextAttemptAt: new Date(r.next_attempt_at!), finishedAt: r.finished_at ? new Date(r.finished_at) : null, last,
      endpoint: { status: r.endpoint_status!, disabledReason: r.disabled_reason, blockedUntil: r.blocked_until ? new Date(r.blocked_until) : null, consecutiveFailures: r.consecutive_failures! },
    }, settings),
  }
}

/** Whether one recorded attempt of the partner's delivery verifies against its endpoint's secret now. */
export async function checkAttemptSignature(partnerId: string, deliveryId: string, attemptId: number) {
  const [row] = await useDb().execute<{ event_id: string | null, request_headers: Record<string, string>, request_body: string | null, sealed_secret: string, previous_sealed_secret: string | null, previous_secret_until: Date | null }>(sql`
    select d.event_id, a.request_headers, a.request_body, e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until
    from delivery_attempts a join deliveries d on d.id = a.delivery_id join webhook_endpoints e on e.id = d.endpoint_id
    where a.id = ${attemptId} and d.id = ${deliveryId}::uuid and e.partner_id = ${partnerId}::uuid`)
  if (!row) throw problem(404, 'attempt-not-found', 'No such attempt of this partner\'s delivery.')
  const body = row.request_body ?? (row.event_id ? await eventMessageBody(row.event_id) : null) ?? ''
  const verdict = checkRecordedSignature(row.request_headers, body, secretsNow(row))
  return { attemptId, verdict, sentence: signatureSentence(verdict) }
}

type BoardRow = {
  event_id: string, lab_id: string, lab: string, type: string, event_at: Date, run_id: string | null, acquisition_id: string | null, version: number | null
  delivery_id: string, status: 'pending' | 'succeeded' | 'dead', attempts: number, finished_at: Date | null, endpoint_id: string, url: string
  sealed_secret: string, previous_sealed_secret: string | null, previous_secret_until: Date | null
  last_headers: Record<string, string> | null, last_body: string | null
}

/** How many of a partner's latest result deliveries the board reads. */
const BOARD_DELIVERIES = 300

/**
 * A partner's results, grouped by lab, each with the endpoints it went to: delivered or not,
 * and whether the last attempt's recorded signature verifies with the endpoint's secret now.
 * The partner's latest result deliveries only (BOARD_DELIVERIES), newest first.
 */
export async function partnerResultBoard(partnerId: string) {
  const rows = await useDb().execute<BoardRow>(sql`
    select ev.id as event_id, l.id as lab_id, l.name as lab, ev.type, ev.created_at as event_at, ev.payload->>'runId' as run_id, ev.payload->>'id' as acquisition_id, r.version,
      d.id as delivery_id, d.status, d.attempts, d.finished_at, e.id as endpoint_id, e.url, e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until,
      la.request_headers as last_headers, la.request_body as last_body
    from (select d.* from deliveries d join webhook_endpoints e on e.id = d.endpoint_id
          where e.partner_id = ${partnerId}::uuid and d.event_id is not null and d.event_type = any(${`{${RESULT_EVENTS.join(',')}}`}::text[])
          order by d.created_at desc, d.id desc limit ${BOARD_DELIVERIES}) d
    join webhook_endpoints e on e.id = d.endpoint_id
    join events ev on ev.id = d.event_id join labs l on l.id = ev.lab_id
    left join results r on r.id::text = coalesce(ev.payload->'result'->>'id', ev.payload->>'resultId')
    left join lateral (select a.request_headers, a.request_body from delivery_attempts a where a.delivery_id = d.id order by a.number desc, a.id desc limit 1) la on true
    order by l.name, ev.created_at desc, ev.id, e.url`)
  const bodies = await eventMessageBodies([...new Set(rows.filter(r => r.last_headers && r.last_body === null).map(r => r.event_id))])
  type Result = { eventId: string, type: string, at: string, runId: string | null, acquisitionId: string | null, version: number | null, endpoints: { deliveryId: string, endpointId: string, url: string, state: string, attempts: number, deliveredAt: string | null, verified: boolean | null }[] }
  const labs = new Map<string, { labId: string, lab: string, results: Result[] }>()
  const byEvent = new Map<string, Result>()
  for (const r of rows) {
    let lab = labs.get(r.lab_id)
    if (!lab) labs.set(r.lab_id, lab = { labId: r.lab_id, lab: r.lab, results: [] })
    let result = byEvent.get(r.event_id)
    if (!result) {
      byEvent.set(r.event_id, result = { eventId: r.event_id, type: r.type, at: new Date(r.event_at).toISOString(), runId: r.run_id, acquisitionId: r.acquisition_id, version: r.version, endpoints: [] })
      lab.results.push(result)
    }
    const body = r.last_body ?? bodies.get(r.event_id) ?? null
    const verdict = r.last_headers && body !== null ? checkRecordedSignature(r.last_headers, body, secretsNow(r)) : null
    result.endpoints.push({
      deliveryId: r.delivery_id, endpointId: r.endpoint_id, url: r.url, attempts: r.attempts,
      state: r.status === 'pending' && r.attempts > 0 ? 'failing' : r.status,
      deliveredAt: r.status === 'succeeded' && r.finished_at ? new Date(r.finished_at).toISOString() : null,
      verified: verdict === null ? null : verdict === 'current' || verdict === 'previous',
    })
  }
  return { items: [...labs.values()], limit: BOARD_DELIVERIES }
}
