import { and, asc, count, eq, ne } from 'drizzle-orm'
import { labs, partners, users } from '../../database/schema'
import type { SignInInput } from '#shared/schemas/auth'
import type { UserUpdate } from '#shared/schemas/users'
import type { SessionUser } from '#shared/types/roles'
import { openSessionCount } from './sessions'
import { clearSignInFailures, failureDelayMs, recordSignInFailure, signInLockState } from './signInThrottle'

// Verified against when the e-mail is unknown, so both paths cost one scrypt check.
let decoyHash: Promise<string> | undefined

/**
 * Signs in with e-mail and password; the answer is the same for an unknown e-mail and a wrong
 * password. The caller opens the console session (startConsoleSession) with the version returned.
 */
export async function signIn(audit: AuditContext, input: SignInInput): Promise<{ user: SessionUser, sessionVersion: number }> {
  const ip = audit.ip ?? 'unknown'
  const lock = await signInLockState(input.email, ip)
  if (lock.locked) throw lockedProblem(lock.retryAfterSeconds)

  const db = useDb()
  const row = await db.query.users.findFirst({ where: eq(users.email, input.email) })
  decoyHash ??= hashPassword('arcwise-decoy-password')
  const passwordOk = await verifyPassword(row?.passwordHash ?? await decoyHash, input.password)
  if (!row || !passwordOk || row.status !== 'active') {
    const failure = await recordSignInFailure(input.email, ip)
    await recordAudit(db, { ...audit, actor: { id: row?.id ?? null, label: input.email }, action: 'sign-in.failed', targetType: 'user', targetId: row?.id })
    if (failure.justLocked) {
      await recordAudit(db, { ...audit, actor: { id: null, label: 'arcwise' }, action: 'sign-in.locked', targetType: 'user', targetId: row?.id, detail: { email: input.email, minutes: Math.ceil(failure.retryAfterSeconds / 60) } })
    }
    await new Promise(r => setTimeout(r, failureDelayMs(failure.failures)))
    if (failure.locked) throw lockedProblem(failure.retryAfterSeconds)
    throw problem(401, 'invalid-credentials', 'The e-mail or the password is wrong.')
  }

  await clearSignInFailures(input.email)
  // A hash made at an older cost is re-made now, while the password is at hand.
  const rehashed = passwordNeedsReHash(row.passwordHash) ? await hashPassword(input.password) : undefined
  await db.update(users).set({ lastSignInAt: new Date(), ...(rehashed ? { passwordHash: rehashed } : {}) }).where(eq(users.id, row.id))
  await recordAudit(db, { ...audit, actor: actorOf(row), action: 'sign-in', targetType: 'user', targetId: row.id })
  return { user: { id: row.id, email: row.email, name: row.name, role: row.role, labId: row.labId, partnerId: row.partnerId }, sessionVersion: row.sessionVersion }
}

function lockedProblem(retryAfterSeconds: number) {
  const minutes = Math.max(1, Math.ceil(retryAfterSeconds / 60))
  return problem(429, 'sign-in-locked', `Too many failed sign-ins. Try again in ${minutes} minute${minutes === 1 ? '' : 's'}, or reset the password.`, { headers: { 'retry-after': String(Math.max(1, retryAfterSeconds)) } })
}

const userColumns = {
  id: users.id, email: users.email, name: users.name, role: users.role, status: users.status,
  labId: users.labId, labName: labs.name, partnerId: users.partnerId, partnerName: partners.name,
  lastSignInAt: users.lastSignInAt, createdAt: users.createdAt, openSessions: openSessionCount(),
}

export function listUsers() {
  return useDb().select(userColumns).from(users)
    .leftJoin(labs, eq(labs.id, users.labId)).leftJoin(partners, eq(partners.id, users.partnerId))
    .orderBy(asc(users.name), asc(users.id))
}

/** Changes a user's role, scope or status; refuses to leave the hub without an active admin. */
export async function updateUser(audit: AuditContext, id: string, change: UserUpdate) {
  return useDb().transaction(async (tx) => {
    const before = await tx.query.users.findFirst({ where: eq(users.id, id) })
    if (!before) throw problem(404, 'user-not-found', 'No such user.')
    await assertScopeExists(tx, change)
    const stillAdmin = change.role === 'admin' && (change.status ?? before.status) === 'active'
    if (before.role === 'admin' && before.status === 'active' && !stillAdmin) {
      const { admins } = firstRow(await tx.select({ admins: count() }).from(users)
        .where(and(eq(users.role, 'admin'), eq(users.status, 'active'), ne(users.id, id))))
      if (admins === 0) throw fieldProblem('role', 'the hub needs at least one active admin', 409, 'last-admin')
    }
    const after = firstRow(await tx.update(users)
      .set({ role: change.role, labId: change.labId, partnerId: change.partnerId, status: change.status ?? before.status, updatedAt: new Date() })
      .where(eq(users.id, id)).returning())
    if (before.role !== after.role || before.labId !== after.labId || before.partnerId !== after.partnerId) {
      await recordAudit(tx, { ...audit, action: 'user.role-changed', targetType: 'user', targetId: id,
        detail: { email: after.email, from: { role: before.role, labId: before.labId, partnerId: before.partnerId }, to: { role: after.role, labId: after.labId, partnerId: after.partnerId } } })
    }
    if (before.status !== after.status) {
      await recordAudit(tx, { ...audit, action: after.status === 'disabled' ? 'user.disabled' : 'user.enabled', targetType: 'user', targetId: id, detail: { email: after.email } })
    }
    return after
  })
}

/** A lab manager's lab and an integrator's partner must exist. */
export async function assertScopeExists(db: Queryable, scope: { labId: string | null, partnerId: string | null }) {
  if (scope.labId && !await db.query.labs.findFirst({ where: eq(labs.id, scope.labId), columns: { id: true } })) {
    throw fieldProblem('labId', 'no such lab')
  }
  if (scope.partnerId && !await db.query.partners.findFirst({ where: eq(partners.id, scope.partnerId), columns: { id: true } })) {
    throw fieldProblem('partnerId', 'no such partner')
  }
}
