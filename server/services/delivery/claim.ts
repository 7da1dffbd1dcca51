import { sql } from 'drizzle-orm'
import { deliveries, events, labs, webhookEndpoints } from '../../database/schema'
import type { BodySource } from './message'
import { workerId } from './settings'

// Phase one of the worker: claiming due deliveries with FOR UPDATE SKIP LOCKED and a lease.

export type Claimed = BodySource & {
  id: string
  endpoint_id: string
  attempts: number
  replay_requested: boolean
  url: string
  sealed_secret: string
  previous_sealed_secret: string | null
  previous_secret_until: string | null
}

// The least an endpoint offers to a claim. A claim that brings fewer rows than this found
// every due delivery: no endpoint had more than it offered.
export const SHARE_MIN = 32

/** Claims up to `limit` due deliveries of active endpoints for this worker, leased for `leaseSeconds`. */
export async function claimDueDeliveries(limit: number, leaseSeconds: number): Promise<Claimed[]> {
  // The plan must not depend on the table's statistics: just after a bulk of events they say
  // no row is leased, and PostgreSQL then joined the claimed rows by scanning the whole table
  // (most of a claim's time in bench:delivery; DEVELOPERS.md, Measured). Rows are therefore found by their ids
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

