import { and, count, desc, eq, gt, inArray, isNull, sql } from 'drizzle-orm'
import { acquisitions, auditLog, deliveries, invitations, labs, partners, results, users, webhookEndpoints } from '../../database/schema'
import { can, isLabScoped, type SessionUser } from '#shared/types/roles'
import { describeAudit } from '../audit'
import { listOrgs } from '../orgs'

/** The figures on the console's front page, each within what the user may read. */
export async function overviewFor(user: SessionUser) {
  const db = useDb()
  const labCount = can(user.role, 'labs:read') ? (await listOrgs(user, 'lab')).length : null
  const partnerCount = can(user.role, 'partners:read') ? (await listOrgs(user, 'partner')).length : null
  let userCount: number | null = null
  let pendingInvitations: number | null = null
  if (can(user.role, 'users:read')) {
    userCount = firstRow(await db.select({ n: count() }).from(users).where(eq(users.status, 'active'))).n
    pendingInvitations = firstRow(await db.select({ n: count() }).from(invitations)
      .where(and(isNull(invitations.acceptedAt), isNull(invitations.revokedAt), gt(invitations.expiresAt, new Date())))).n
  }
  // Without audit:read a person sees only their own entries.
  const recentAudit = await describeAudit(await db.select().from(auditLog)
    .where(can(user.role, 'audit:read') ? undefined : eq(auditLog.actorUserId, user.id))
    .orderBy(desc(auditLog.id)).limit(8))
  const ownLab = user.labId ? (await db.select().from(labs).where(inArray(labs.id, [user.labId])))[0] ?? null : null
  const ownPartner = user.partnerId ? (await db.select().from(partners).where(eq(partners.id, user.partnerId)))[0] ?? null : null
  const deliveries = can(user.role, 'partners:read') ? await deliveryHealth(user.role === 'integrator' ? user.partnerId : null) : null
  const activity = can(user.role, 'labs:read') ? await acquisitionActivity(isLabScoped(user.role) ? user.labId : null) : null
  return { labCount, partnerCount, userCount, pendingInvitations, recentAudit, ownLab, ownPartner, deliveries, activity }
}

const ACTIVITY_DAYS = 14

/**
 * Acquisitions of one lab or of all: per lab per day acquired over the last two weeks (what
 * the instruments measured), per hour received over the last day (the ingest rate), and the
 * latest results that carry QC flags.
 */
async function acquisitionActivity(labId: string | null) {
  const db = useDb()
  const scope = labId ? sql`and a.lab_id = ${labId}::uuid` : sql``
  const daily = await db.execute<{ lab_id: string, lab: string, day: string, n: number }>(sql`
    select a.lab_id, l.name as lab, to_char(date_trunc('day', a.acquired_at at time zone 'UTC'), 'YYYY-MM-DD') as day, count(*)::int as n
    from ${acquisitions} a join ${labs} l on l.id = a.lab_id
    where a.acquired_at >= date_trunc('day', now() at time zone 'UTC') at time zone 'UTC' - ${`${ACTIVITY_DAYS - 1} days`}::interval ${scope}
    group by 1, 2, 3 order by 2, 3`)
  const hourly = await db.execute<{ hour: string, n: number }>(sql`
    select to_char(date_trunc('hour', a.created_at at time zone 'UTC'), 'YYYY-MM-DD"T"HH24":00:00Z"') as hour, count(*)::int as n
    from ${acquisitions} a where a.created_at > now() - interval '24 hours' ${scope} group by 1 order by 1`)
  const recentQc = await db.execute<{ id: string, lab_id: string, lab: string, run_id: string, received_at: Date, qc: { code: string, message: string }[] }>(sql`
    select a.id, a.lab_id, l.name as lab, a.external_id as run_id, a.created_at as received_at, r.summary->'qc' as qc
    from ${acquisitions} a join ${results} r on r.acquisition_id = a.id join ${labs} l on l.id = a.lab_id
    where jsonb_array_length(r.summary->'qc') > 0 ${scope}
    order by a.created_at desc limit 8`)
  const days = Array.from({ length: ACTIVITY_DAYS }, (_, i) => new Date(Date.now() - (ACTIVITY_DAYS - 1 - i) * 86_400_000).toISOString().slice(0, 10))
  const byLab = new Map<string, { labId: string, lab: string, counts: number[] }>()
  for (const r of daily) {
    const entry = byLab.get(r.lab_id) ?? { labId: r.lab_id, lab: r.lab, counts: days.map(() => 0) }
    const i = days.indexOf(r.day)
    if (i >= 0) entry.counts[i] = r.n
    byLab.set(r.lab_id, entry)
  }
  return {
    days,
    perLab: [...byLab.values()],
    hourly: hourly.map(h => ({ hour: h.hour, n: h.n })),
    last24h: hourly.reduce((s, h) => s + h.n, 0),
    recentQc: recentQc.map(q => ({ id: q.id, labId: q.lab_id, lab: q.lab, runId: q.run_id, receivedAt: new Date(q.received_at).toISOString(), flags: q.qc })),
  }
}

/** Webhook delivery health, of one partner or of all: the last 24 hours and what needs a hand now. */
async function deliveryHealth(partnerId: string | null) {
  const scope = partnerId ? sql`and e.partner_id = ${partnerId}::uuid` : sql``
  const [row] = await useDb().execute<{ succeeded: number, settled: number, failing: number, dead: number, endpoints_failing: number, endpoints_disabled: number }>(sql`
    select
      (select count(*)::int from ${deliveries} d join ${webhookEndpoints} e on e.id = d.endpoint_id where d.status = 'succeeded' and d.finished_at > now() - interval '24 hours' ${scope}) as succeeded,
      (select count(*)::int from ${deliveries} d join ${webhookEndpoints} e on e.id = d.endpoint_id where d.status <> 'pending' and d.finished_at > now() - interval '24 hours' ${scope}) as settled,
      (select count(*)::int from ${deliveries} d join ${webhookEndpoints} e on e.id = d.endpoint_id where d.status = 'pending' and d.attempts > 0 ${scope}) as failing,
      (select count(*)::int from ${deliveries} d join ${webhookEndpoints} e on e.id = d.endpoint_id where d.status = 'dead' and d.event_id is not null ${scope}) as dead,
      (select count(*)::int from ${webhookEndpoints} e where e.failing_since is not null and e.status = 'active' ${scope}) as endpoints_failing,
      (select count(*)::int from ${webhookEndpoints} e where e.status = 'disabled' ${scope}) as endpoints_disabled`)
  const r = row!
  return {
    succeeded24h: r.succeeded,
    successRate24h: r.settled ? r.succeeded / r.settled : null,
    failing: r.failing, dead: r.dead, endpointsFailing: r.endpoints_failing, endpointsDisabled: r.endpoints_disabled,
  }
}
