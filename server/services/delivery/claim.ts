import { sql } from 'drizzle-orm'
import { acquisitions, deliveries, events, labs, webhookEndpoints } from '../../database/schema'
import type { BodySource } from './message'
import { deliverySettings, workerId } from './settings'

// Phase one of the worker: claiming due deliveries with FOR UPDATE SKIP LOCKED and a lease,
// fairly across endpoints. An endpoint never has more sends in flight (leased rows, in every
// worker process) than its limit, nor more than its rate allows, nor any while it is blocked
// (Retry-After, or its circuit waiting for the next probe); within those bounds each endpoint
// gives one delivery per turn, so no endpoint takes more than its share while others have
// due work. A probe through an open circuit is a message never tried where one is due.

export type Claimed = BodySource & {
  id: string
  /** The partition key, as text (microseconds kept): the record finds the row in its month by it. */
  created_at: string
  endpoint_id: string
  attempts: number
  replay_requested: boolean
  url: string
  sealed_secret: string
  previous_sealed_secret: string | null
  previous_secret_until: string | null
  /** The id of the request that posted the event's acquisition (result events), for the log lines. */
  request_id: string | null
}

// The advisory lock that makes claims, in every process, one at a time (keyed by a name, as
// the sequences' locks are). Each claim then counts the leases of every claim before it, so
// the per-endpoint limits hold across processes; claims are a few milliseconds and far
// apart, and sends and records do not take it.
const CLAIM_LOCK = 'delivery:claim'

// How many of an endpoint's earliest due deliveries a probe through its open circuit looks
// among for a message never tried: enough to see past the retries that come due together
// after a burst of failures, few enough that the claim's walk of the due index stays short
// behind a backlog of thousands (common practice, no source).
const PROBE_WINDOW = 64

/** Claims up to `limit` due deliveries of active endpoints for this worker, leased for `leaseSeconds`. */
export async function claimDueDeliveries(limit: number, leaseSeconds: number): Promise<Claimed[]> {
  const { endpointInFlight, circuitFailures } = deliverySettings()
  return useDb().transaction(async (tx) => {
    // Taken before the claim's statement starts, so its snapshot sees every earlier claim.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${CLAIM_LOCK}))`)
    // The plan must not depend on the table's statistics: just after a bulk of events they say
    // no row is leased, and PostgreSQL then joined the claimed rows by scanning the whole table
    // (most of a claim's time in bench:delivery; DEVELOPERS.md, Measured). Rows are therefore
    // found by their ids (`= any(array(...))`, always the primary key), never by a join the
    // planner may choose.
    return tx.execute<Claimed>(sql`
      with room as (
        -- Each endpoint's free slots: its limit (one for an ordered endpoint and for a probe
        -- through an open circuit) less its deliveries leased now, read on deliveries_endpoint_leased_idx.
        select e.id, e.ordered, e.rate_per_second, e.rate_next_at, e.consecutive_failures >= ${circuitFailures} as probe,
          (case when e.ordered or e.consecutive_failures >= ${circuitFailures} then 1 else coalesce(e.max_in_flight, ${endpointInFlight}) end)
          - (select count(*) from ${deliveries} l where l.endpoint_id = e.id and l.status = 'pending' and l.lease_until is not null and l.lease_until >= now())::int as free
        from ${webhookEndpoints} e
        where e.status = 'active' and (e.blocked_until is null or e.blocked_until <= now())),
      allowed as (
        -- And no more than its rate allows now: a generic cell rate algorithm (ITU-T I.371)
        -- with a burst of one second's sends, at least one.
        select r.id, r.ordered, r.probe, least(r.free, case when r.rate_per_second is null then r.free else floor(r.rate_per_second
          * (extract(epoch from now() - greatest(coalesce(r.rate_next_at, now()), now())) + greatest(1, 1 / r.rate_per_second)))::int end) as n
        from room r where r.free > 0),
      candidates as (
        select c.id, c.created_at, c.turn from allowed a cross join lateral (
          -- An endpoint's earliest due deliveries, numbered: the claim takes every endpoint's
          -- first, then every endpoint's second, and so on.
          select x.id, x.created_at, row_number() over (order by x.next_attempt_at) as turn from (
            select d.id, d.created_at, d.next_attempt_at from ${deliveries} d
            where not a.ordered and not a.probe and d.endpoint_id = a.id and d.status = 'pending' and d.next_attempt_at <= now() and (d.lease_until is null or d.lease_until < now())
            order by d.next_attempt_at limit greatest(a.n, 0)) x
          union all
          -- A probe through an open circuit: a message never tried (or a replay) if one is among
          -- the endpoint's PROBE_WINDOW earliest due, the earliest such; else the earliest due.
          -- A retry failed before and may fail again for its own sake; probing with retries
          -- alone kept a circuit open while the endpoint took new messages (record.ts,
          -- endpointHealth). The window bounds the walk of the due index behind a long backlog.
          select q.id, q.created_at, 1 from (
            select p.id, p.created_at from (
              select d.id, d.created_at, d.next_attempt_at, d.attempts, d.replay_requested from ${deliveries} d
              where not a.ordered and a.probe and d.endpoint_id = a.id and d.status = 'pending' and d.next_attempt_at <= now() and (d.lease_until is null or d.lease_until < now())
              order by d.next_attempt_at limit ${PROBE_WINDOW}) p
            order by (p.attempts > 0 and not p.replay_requested), p.next_attempt_at limit greatest(a.n, 0)) q
          union all
          -- An ordered endpoint: its oldest waiting delivery (events in the order recorded, a
          -- lab's by its sequence), and only once due; nothing after it goes first.
          select h.id, h.created_at, 1 from (
            select d.id, d.created_at, d.next_attempt_at, d.lease_until from ${deliveries} d left join ${events} ev on ev.id = d.event_id
            where a.ordered and d.endpoint_id = a.id and d.status = 'pending' and d.event_id is not null
            order by d.created_at, ev.sequence, d.id limit 1) h
          where h.next_attempt_at <= now() and (h.lease_until is null or h.lease_until < now())) c
        where a.n > 0
        order by c.turn limit ${limit}),
      -- Locked after they are chosen (and checked again once locked), so the rows of other
      -- endpoints that the choice passed over are not locked. The months between the oldest
      -- and newest chosen row bound the search: deliveries are partitioned by month of
      -- created_at, and PostgreSQL skips the other months' partitions at run time (it does not
      -- for "= any" of an array a subquery makes), rather than probing each month's index.
      due as (
        select d.id, d.created_at from ${deliveries} d
        where d.id = any(array(select id from candidates))
          and d.created_at between (select min(created_at) from candidates) and (select max(created_at) from candidates)
          and d.status = 'pending' and (d.lease_until is null or d.lease_until < now())
        for no key update of d skip locked),
      claimed as (
        update ${deliveries} d set lease_owner = ${workerId}, lease_until = now() + make_interval(secs => ${leaseSeconds})
        where d.id = any(array(select id from due)) and d.created_at between (select min(created_at) from due) and (select max(created_at) from due)
        returning d.id, d.created_at::text as created_at, d.endpoint_id, d.event_id, d.event_type, d.test_payload, d.attempts, d.replay_requested),
      -- A rate-limited endpoint's theoretical arrival time moves on by the sends claimed (its
      -- row locked in id order, as records lock endpoints, so the two cannot deadlock; FOR NO
      -- KEY UPDATE, which the deliveries' foreign key checks in ingest's fan-out do not wait for).
      pacing as (
        select e.id from ${webhookEndpoints} e
        where e.rate_per_second is not null and e.id = any(array(select endpoint_id from claimed)) order by e.id for no key update of e),
      paced as (
        update ${webhookEndpoints} e set rate_next_at = greatest(coalesce(e.rate_next_at, now()), now()) + make_interval(secs => n.count / e.rate_per_second)
        from (select endpoint_id, count(*)::float8 as count from claimed group by endpoint_id) n
        where e.id = n.endpoint_id and e.id = any(array(select id from pacing)))
      select c.*, e.url, e.sealed_secret, e.previous_sealed_secret, e.previous_secret_until::text,
             -- An event owed to several endpoints: its payload comes once, on the first of its rows.
             case when row_number() over (partition by c.event_id order by c.id) = 1 then ev.payload::text end as payload_text,
             ev.sequence, l.slug as lab, ev.created_at::text as event_at, a.request_id
      from claimed c join candidates k on k.id = c.id join ${webhookEndpoints} e on e.id = c.endpoint_id
      left join ${events} ev on ev.id = c.event_id left join ${labs} l on l.id = ev.lab_id
      -- A result event's acquisition (payload.id, a uuid in every result.* event) gives the
      -- request id the worker's log lines carry; it is never part of the message.
      left join ${acquisitions} a on a.id = (case when ev.type like 'result.%' then (ev.payload->>'id')::uuid end)
      order by k.turn`)
  }).then((rows) => {
    const log = useLog()
    if (log.isLevelEnabled('debug')) {
      for (const r of rows) log.debug({ reqId: r.request_id, deliveryId: r.id, endpointId: r.endpoint_id, eventId: r.event_id, attempt: r.attempts + 1 }, 'delivery claimed')
    }
    const payloads = new Map<string, string>()
    for (const r of rows) if (r.event_id && r.payload_text !== null) payloads.set(r.event_id, r.payload_text)
    return rows.map(r => r.event_id ? { ...r, payload_text: payloads.get(r.event_id) ?? null } : r)
  })
}
