import { and, eq, gt, isNull, sql } from 'drizzle-orm'
import { passwordResetTokens, users } from '../../database/schema'
import { kickMailOutbox, linkMail, queueMail } from '../mail'
import { clearSignInFailures } from './signInThrottle'

const resetMinutes = 60

/**
 * Mails a reset link when the e-mail belongs to an active user. The caller answers the
 * same either way, so the route never tells whether an e-mail exists.
 */
export async function requestPasswordReset(audit: AuditContext, email: string) {
  const { appUrl } = useRuntimeConfig()
  await useDb().transaction(async (tx) => {
    const user = await tx.query.users.findFirst({ where: and(eq(users.email, email), eq(users.status, 'active')) })
    if (!user) return
    // At most three live links per user at a time: enough for a lost mail, not a mail bomb.
    const { live } = firstRow(await tx.select({ live: sql<number>`count(*)::int` }).from(passwordResetTokens)
      .where(and(eq(passwordResetTokens.userId, user.id), isNull(passwordResetTokens.usedAt), gt(passwordResetTokens.expiresAt, new Date()))))
    if (live >= 3) return
    const { token, hash } = newLinkToken()
    await tx.insert(passwordResetTokens).values({ userId: user.id, tokenHash: hash, expiresAt: new Date(Date.now() + resetMinutes * 60_000) })
    await queueMail(tx, linkMail(user.email, 'Reset your Arcwise password', [
      `Someone asked to reset the password of the Arcwise account ${user.email}.`,
      `The link works once and for ${resetMinutes} minutes. If it was not you, ignore this message.`,
    ], { label: 'Choose a new password', url: `${appUrl}/reset/${token}` }))
    await recordAudit(tx, { ...audit, actor: { id: null, label: email }, action: 'password.reset-requested', targetType: 'user', targetId: user.id })
  })
  kickMailOutbox()
}

async function usableReset(db: Queryable, token: string, lock = false) {
  const query = db.select().from(passwordResetTokens).where(eq(passwordResetTokens.tokenHash, hashToken(token)))
  const [row] = lock ? await query.for('update') : await query
  if (!row) throw problem(404, 'reset-invalid', 'This reset link is not valid. Ask for a new one.')
  if (row.usedAt) throw problem(410, 'reset-used', 'This reset link has been used already. Ask for a new one.')
  if (row.expiresAt <= new Date()) throw problem(410, 'reset-expired', 'This reset link has expired. Ask for a new one.')
  return row
}

export async function describePasswordReset(token: string) {
  const row = await usableReset(useDb(), token)
  const user = await useDb().query.users.findFirst({ where: eq(users.id, row.userId), columns: { email: true } })
  return { email: user?.email ?? '', expiresAt: row.expiresAt }
}

/** Sets the new password, ends every other session and lifts a sign-in lock. */
export async function completePasswordReset(audit: AuditContext, token: string, password: string) {
  const passwordHash = await hashPassword(password)
  const user = await useDb().transaction(async (tx) => {
    const reset = await usableReset(tx, token, true)
    await tx.update(passwordResetTokens).set({ usedAt: new Date() }).where(eq(passwordResetTokens.userId, reset.userId))
    const user = firstRow(await tx.update(users)
      .set({ passwordHash, sessionVersion: sql`${users.sessionVersion} + 1`, updatedAt: new Date() })
      .where(eq(users.id, reset.userId)).returning())
    await recordAudit(tx, { ...audit, actor: actorOf(user), action: 'password.reset', targetType: 'user', targetId: user.id })
    return user
  })
  await clearSignInFailures(user.email)
  return { email: user.email }
}
