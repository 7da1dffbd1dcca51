import { and, count, desc, eq, gt, inArray, isNull, sql } from 'drizzle-orm'
import { auditLog, deliveries, invitations, labs, partners, users, webhookEndpoints } from '../database/schema'
import { can, type SessionUser } from '#shared/types/roles'

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
  const recentAudit = await db.select().from(auditLog)
    .where(can(user.role, 'audit:read') ? undefined : eq(auditLog.actorUserId, user.id))
    .orderBy(desc(auditLog.id)).limit(8)
  const ownLab = user.labId ? (await db.select().from(labs).where(inArray(labs.id, [user.labId])))[0] ?? null : null
  const ownPartner = user.partnerId ? (await db.select().from(partners).where(eq(partners.id, user.partnerId)))[0] ?? null : null
  const deliveries = can(user.role, 'partners:read') ? await deliveryHealth(user.role === 'integrator' ? user.partnerId : null) : null
  return { labCount, partnerCount, userCount, pendingInvitations, recentAudit, ownLab, ownPartner, deliveries }
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
