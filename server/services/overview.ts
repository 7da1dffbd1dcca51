import { and, count, desc, eq, gt, inArray, isNull } from 'drizzle-orm'
import { auditLog, invitations, labs, partners, users } from '../database/schema'
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
  return { labCount, partnerCount, userCount, pendingInvitations, recentAudit, ownLab, ownPartner }
}
