import { sql } from 'drizzle-orm'
import { isLabScoped, type SessionUser } from '#shared/types/roles'

// Each role's home: what needs this person now, each item with where it is fixed. One call,
// a few statements per role (each a set of rows, never a query per row); every statement is
// scoped to what the role reads, as the rest of the console is (a lab's people their lab, an
// integrator their partner).

/** How far back "recent" reaches for QC flags and deliveries (common practice, no source). */
const RECENT_DAYS = 14
/** An instrument with no acquisition for this long is stale on the hub's home. */
const STALE_DAYS = 30
/** Control-chart violations count as open this long, as the isotope panel reads them. */
const CHART_DAYS = 90

const iso = (d: Date | string | null) => (d === null ? null : new Date(d).toISOString())
const interval = (days: number) => sql`${`${days} days`}::interval`

/** Held results a reviewer can still release (the review queue's rule, review/results.ts). */
const awaitingReview = sql`r.review_state = 'held' and not exists (select 1 from results n where n.id = r.superseded_by and n.review_state <> 'rejected')`

type InstrumentRow = {
  id: string, slug: string, name: string
  last_id: string | null, last_run: string | null, last_at: Date | null
  cal_version: number | null, cal_from: Date | null
  recent: number, flagged: number, flagged_held: number, codes: { code: string, n: number }[] | null
  chart_points: number, chart_violations: number, chart_last_at: Date | null, violation_material: string | null, violation_quantity: string | null
  held: number
}

/** A lab's instruments with their state, the review queue, and the partners its results do not reach. */
async function labHome(labId: string) {
  const db = useDb()
  const instruments = await db.execute<InstrumentRow>(sql`
    select i.id, i.slug, i.name, la.id as last_id, la.external_id as last_run, la.acquired_at as last_at,
      cal.version as cal_version, cal.valid_from as cal_from,
      coalesce(qc.recent, 0) as recent, coalesce(qc.flagged, 0) as flagged, coalesce(qc.flagged_held, 0) as flagged_held, qc.codes,
      coalesce(cc.points, 0) as chart_points, coalesce(cc.violations, 0) as chart_violations, cc.last_at as chart_last_at,
      cv.material as violation_material, cv.quantity as violation_quantity,
      coalesce(rv.held, 0) as held
    from instruments i
    left join lateral (select a.id, a.external_id, a.acquired_at from acquisitions a
      where a.lab_id = i.lab_id and a.instrument_id = i.id order by a.acquired_at desc limit 1) la on true
    left join lateral (select c.version, c.valid_from from calibrations c
      where c.instrument_id = i.id and c.valid_from <= now() order by c.valid_from desc, c.version desc limit 1) cal on true
    left join lateral (
      select count(*)::int as recent,
        count(*) filter (where jsonb_array_length(r.summary->'qc') > 0)::int as flagged,
        count(*) filter (where jsonb_array_length(r.summary->'qc') > 0 and ${awaitingReview})::int as flagged_held,
        (select jsonb_agg(jsonb_build_object('code', code, 'n', n) order by n desc, code) from (
          select f->>'code' as code, count(*)::int as n from results r2 join acquisitions a2 on a2.id = r2.acquisition_id,
            jsonb_array_elements(r2.summary->'qc') f
          where a2.lab_id = i.lab_id and a2.instrument_id = i.id and a2.created_at > now() - ${interval(RECENT_DAYS)} and r2.superseded_by is null
          group by 1) c) as codes
      from results r join acquisitions a on a.id = r.acquisition_id
      where a.lab_id = i.lab_id and a.instrument_id = i.id and a.created_at > now() - ${interval(RECENT_DAYS)} and r.superseded_by is null) qc on true
    left join lateral (select count(*)::int as points,
        count(*) filter (where cardinality(p.violations) > 0 and p.at > now() - ${interval(CHART_DAYS)})::int as violations, max(p.at) as last_at
      from control_points p where p.instrument_id = i.id) cc on true
    left join lateral (select p.material, p.quantity from control_points p
      where p.instrument_id = i.id and cardinality(p.violations) > 0 and p.at > now() - ${interval(CHART_DAYS)} order by p.at desc limit 1) cv on true
    left join lateral (select count(*)::int as held from results r join acquisitions a on a.id = r.acquisition_id
      where r.lab_id = i.lab_id and a.instrument_id = i.id and ${awaitingReview}) rv on true
    where i.lab_id = ${labId}::uuid
    order by i.name, i.id`)
  const [queue] = await db.execute<{ results: number, sequences: number, oldest: Date | null }>(sql`
    select (select count(*)::int from results r where r.lab_id = ${labId}::uuid and ${awaitingReview}) as results,
      (select count(*)::int from sequences s where s.lab_id = ${labId}::uuid and s.status = 'processed' and s.review_state = 'held') as sequences,
      (select min(r.created_at) from results r where r.lab_id = ${labId}::uuid and ${awaitingReview}) as oldest`)
  return {
    labId,
    instruments: instruments.map(i => ({
      id: i.id, slug: i.slug, name: i.name,
      lastAcquisition: i.last_id ? { id: i.last_id, runId: i.last_run!, acquiredAt: iso(i.last_at)! } : null,
      calibration: i.cal_version === null ? null : { version: i.cal_version, validFrom: iso(i.cal_from)! },
      qc: { days: RECENT_DAYS, results: i.recent, flagged: i.flagged, flaggedAwaitingReview: i.flagged_held, codes: i.codes ?? [] },
      chart: {
        points: i.chart_points, violations: i.chart_violations, days: CHART_DAYS, lastAt: iso(i.chart_last_at),
        // The chart to open: the one with the latest violation; otherwise the lab's list.
        violation: i.violation_material ? { material: i.violation_material, quantity: i.violation_quantity! } : null,
      },
      awaitingReview: i.held,
    })),
    review: { results: queue!.results, sequences: queue!.sequences, oldest: iso(queue!.oldest) },
    partners: await partnersFailingFor(labId),
  }
}

type PartnerRow = { id: string, name: string, disabled: number, failing: number, dead: number, reasons: string[] | null }

/** Partners the lab grants whose endpoints taking its results are disabled or failing, or whose deliveries of its events died lately. */
async function partnersFailingFor(labId: string) {
  const rows = await useDb().execute<PartnerRow>(sql`
    select p.id, p.name,
      count(*) filter (where e.status = 'disabled')::int as disabled,
      count(*) filter (where e.status = 'active' and e.failing_since is not null)::int as failing,
      coalesce(sum(dd.n), 0)::int as dead,
      array_remove(array_agg(distinct e.disabled_reason), null) as reasons
    from grants g join partners p on p.id = g.partner_id
    join webhook_endpoints e on e.partner_id = p.id and (cardinality(e.lab_ids) = 0 or ${labId}::uuid = any(e.lab_ids))
    left join lateral (select count(*)::int as n from deliveries d join events ev on ev.id = d.event_id
      where d.endpoint_id = e.id and d.status = 'dead' and ev.lab_id = ${labId}::uuid and d.created_at > now() - ${interval(RECENT_DAYS)}) dd on true
    where g.lab_id = ${labId}::uuid
    group by p.id, p.name
    having count(*) filter (where e.status = 'disabled' or (e.status = 'active' and e.failing_since is not null)) > 0 or coalesce(sum(dd.n), 0) > 0
    order by p.name`)
  return rows.map(r => ({ id: r.id, name: r.name, endpointsDisabled: r.disabled, endpointsFailing: r.failing, deadDeliveries: r.dead, reasons: r.reasons ?? [] }))
}

type EndpointRow = {
  id: string, partner_id: string, partner: string, url: string, description: string, status: 'active' | 'paused' | 'disabled'
  disabled_reason: string | null, failing_since: Date | null, consecutive_failures: number, blocked_until: Date | null
  delivered: number, dead: number, failing_now: number, last_success: Date | null
}

/** Endpoints with their recent deliveries: `partnerId` one partner's all, or (null) every partner's that needs a hand. */
async function endpointHealth(partnerId: string | null) {
  const scope = partnerId ? sql`e.partner_id = ${partnerId}::uuid` : sql`(e.status = 'disabled' or e.failing_since is not null or coalesce(h.dead, 0) > 0)`
  const rows = await useDb().execute<EndpointRow>(sql`
    select e.id, e.partner_id, p.name as partner, e.url, e.description, e.status, e.disabled_reason, e.failing_since, e.consecutive_failures, e.blocked_until,
      coalesce(h.delivered, 0) as delivered, coalesce(h.dead, 0) as dead, coalesce(h.failing_now, 0) as failing_now, h.last_success
    from webhook_endpoints e join partners p on p.id = e.partner_id
    left join lateral (select count(*) filter (where d.status = 'succeeded')::int as delivered,
        count(*) filter (where d.status = 'dead' and d.event_id is not null)::int as dead,
        count(*) filter (where d.status = 'pending' and d.attempts > 0)::int as failing_now,
        max(d.finished_at) filter (where d.status = 'succeeded') as last_success
      from deliveries d where d.endpoint_id = e.id and d.created_at > now() - ${interval(RECENT_DAYS)}) h on true
    where ${scope}
    order by (e.status = 'disabled') desc, (e.failing_since is not null) desc, e.updated_at desc, e.id
    limit 50`)
  return rows.map(r => ({
    id: r.id, partnerId: r.partner_id, partner: r.partner, url: r.url, description: r.description, status: r.status, disabledReason: r.disabled_reason,
    failingSince: iso(r.failing_since), consecutiveFailures: r.consecutive_failures, blockedUntil: iso(r.blocked_until),
    delivered: r.delivered, dead: r.dead, failingNow: r.failing_now, lastSuccess: iso(r.last_success), days: RECENT_DAYS,
  }))
}

type DeadRow = { id: string, endpoint_id: string, url: string, event_type: string, lab: string | null, run_id: string | null, attempts: number, last_class: string | null, last_status_code: number | null, finished_at: Date | null }

/** A partner's latest dead deliveries of events (the ones a replay can send again). */
async function deadDeliveries(partnerId: string) {
  const rows = await useDb().execute<DeadRow>(sql`
    select d.id, d.endpoint_id, e.url, d.event_type, l.name as lab, ev.payload->>'runId' as run_id, d.attempts, d.last_class, d.last_status_code, d.finished_at
    from deliveries d join webhook_endpoints e on e.id = d.endpoint_id
    join events ev on ev.id = d.event_id join labs l on l.id = ev.lab_id
    where e.partner_id = ${partnerId}::uuid and d.status = 'dead'
    order by d.finished_at desc nulls last, d.id limit 10`)
  const [total] = await useDb().execute<{ n: number }>(sql`
    select count(*)::int as n from deliveries d join webhook_endpoints e on e.id = d.endpoint_id
    where e.partner_id = ${partnerId}::uuid and d.status = 'dead' and d.event_id is not null`)
  return {
    total: total!.n,
    items: rows.map(r => ({ id: r.id, endpointId: r.endpoint_id, url: r.url, eventType: r.event_type, lab: r.lab, runId: r.run_id, attempts: r.attempts, lastClass: r.last_class, lastStatusCode: r.last_status_code, finishedAt: iso(r.finished_at) })),
  }
}

type GrantRow = { lab_id: string, lab: string, granted_at: Date, event_types: string[], latest: { acquisitionId: string, runId: string, version: number, releasedAt: string, deliveryId: string | null, delivery: string | null }[] | null }

/** The labs that grant the partner, each with its latest released results and whether they reached the partner. */
async function grantingLabs(partnerId: string) {
  const rows = await useDb().execute<GrantRow>(sql`
    select l.id as lab_id, l.name as lab, g.created_at as granted_at, g.event_types,
      (select jsonb_agg(x order by x->>'releasedAt' desc) from (
        select jsonb_build_object('acquisitionId', a.id, 'runId', a.external_id, 'version', r.version, 'releasedAt', r.released_at,
          'deliveryId', dl.id, 'delivery', dl.state) as x
        from results r join acquisitions a on a.id = r.acquisition_id
        left join lateral (select d.id, case when d.status = 'pending' and d.attempts > 0 then 'failing' else d.status::text end as state
          from events ev join deliveries d on d.event_id = ev.id join webhook_endpoints e on e.id = d.endpoint_id and e.partner_id = ${partnerId}::uuid
          where ev.lab_id = l.id and ev.type in ('result.released', 'result.corrected') and ev.payload->>'id' = a.id::text and ev.payload->'result'->>'id' = r.id::text
          order by d.created_at desc limit 1) dl on true
        where r.lab_id = l.id and r.review_state = 'released'
        order by r.released_at desc nulls last limit 3) s) as latest
    from grants g join labs l on l.id = g.lab_id
    where g.partner_id = ${partnerId}::uuid
    order by l.name`)
  return rows.map(r => ({ labId: r.lab_id, lab: r.lab, grantedAt: iso(r.granted_at)!, eventTypes: r.event_types, latest: r.latest ?? [] }))
}

type StaleRow = { id: string, lab_id: string, lab: string, name: string, slug: string, last_at: Date | null }
type LabAttentionRow = { id: string, name: string, held: number, violations: number }

/** The hub's home: endpoints that fail, dead deliveries, stale instruments, labs with work waiting, pending invitations. */
async function hubHome() {
  const db = useDb()
  const stale = await db.execute<StaleRow>(sql`
    select i.id, i.lab_id, l.name as lab, i.name, i.slug, la.acquired_at as last_at
    from instruments i join labs l on l.id = i.lab_id
    left join lateral (select a.acquired_at from acquisitions a where a.lab_id = i.lab_id and a.instrument_id = i.id order by a.acquired_at desc limit 1) la on true
    where la.acquired_at is null or la.acquired_at < now() - ${interval(STALE_DAYS)}
    order by la.acquired_at nulls first, l.name, i.name limit 20`)
  const labsWaiting = await db.execute<LabAttentionRow>(sql`
    select l.id, l.name,
      (select count(*)::int from results r where r.lab_id = l.id and ${awaitingReview}) as held,
      (select count(*)::int from control_points p where p.lab_id = l.id and cardinality(p.violations) > 0 and p.at > now() - ${interval(CHART_DAYS)}) as violations
    from labs l order by l.name`)
  const [inv] = await db.execute<{ n: number, expiring: number }>(sql`
    select count(*)::int as n, count(*) filter (where expires_at < now() + interval '2 days')::int as expiring
    from invitations where accepted_at is null and revoked_at is null and expires_at > now()`)
  return {
    endpoints: await endpointHealth(null),
    staleInstruments: { days: STALE_DAYS, items: stale.map(s => ({ id: s.id, labId: s.lab_id, lab: s.lab, name: s.name, slug: s.slug, lastAcquiredAt: iso(s.last_at) })) },
    labs: labsWaiting.filter(l => l.held > 0 || l.violations > 0).map(l => ({ id: l.id, name: l.name, awaitingReview: l.held, chartViolations: l.violations, chartDays: CHART_DAYS })),
    invitations: { pending: inv!.n, expiringSoon: inv!.expiring },
  }
}

/** What this person's home shows: their lab's, their partner's, or the hub's. */
export async function homeFor(user: SessionUser) {
  if (isLabScoped(user.role)) return { kind: 'lab' as const, lab: user.labId ? await labHome(user.labId) : null }
  if (user.role === 'integrator') {
    if (!user.partnerId) return { kind: 'partner' as const, partner: null }
    const [endpoints, dead, labs] = [await endpointHealth(user.partnerId), await deadDeliveries(user.partnerId), await grantingLabs(user.partnerId)]
    return { kind: 'partner' as const, partner: { partnerId: user.partnerId, endpoints, dead, labs } }
  }
  return { kind: 'hub' as const, hub: await hubHome() }
}
