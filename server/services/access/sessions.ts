import { and, eq, gt, isNull, sql } from 'drizzle-orm'
import { userSessions, users } from '../../database/schema'
import { consumePerMinute } from './rateLimits'

// Console sessions: the sealed cookie (nuxt-auth-utils) names the user, the session version a
// password reset bumps, and, in its server-only `secure` part, a row of user_sessions. The
// guards accept the cookie only while that row is open, so signing out, an admin ending a
// user's sessions, or a password reset stops a copied cookie on the server.

/** Opens a session row for `userId` (the cookie naming it is set by startConsoleSession, server/utils/consoleSession.ts). */
export async function openSessionRow(userId: string, client: { ip: string, userAgent: string | null }, db: Queryable = useDb()): Promise<string> {
  const maxAgeSeconds = Number(useRuntimeConfig().session?.maxAge ?? 60 * 60 * 12)
  const row = firstRow(await db.insert(userSessions).values({
    userId,
    expiresAt: new Date(Date.now() + maxAgeSeconds * 1000),
    ip: client.ip,
    userAgent: client.userAgent,
  }).returning({ id: userSessions.id }))
  return row.id
}

const uuidPattern = /^[\da-f]{8}-[\da-f]{4}-[\da-f]{4}-[\da-f]{4}-[\da-f]{12}$/i

/** The user of the request's cookie when its session row is open and the user active; undefined otherwise. */
export async function userOfOpenSession(cookie: { user?: unknown, secure?: unknown }) {
  const user = cookie.user as { id?: unknown, sessionVersion?: unknown } | undefined
  const sessionId = (cookie.secure as { sessionId?: unknown } | undefined)?.sessionId
  if (typeof user?.id !== 'string' || typeof sessionId !== 'string' || !uuidPattern.test(user.id) || !uuidPattern.test(sessionId)) return undefined
  const [row] = await useDb().select({ user: users }).from(userSessions)
    .innerJoin(users, eq(users.id, userSessions.userId))
    .where(and(eq(userSessions.id, sessionId), eq(userSessions.userId, user.id), isNull(userSessions.endedAt), gt(userSessions.expiresAt, sql`now()`)))
  if (!row || row.user.status !== 'active' || row.user.sessionVersion !== user.sessionVersion) return undefined
  return row.user
}

/** Ends the session a cookie names (sign-out); a cookie naming no open session changes nothing. */
export async function endConsoleSession(cookie: { secure?: unknown }) {
  const sessionId = (cookie.secure as { sessionId?: unknown } | undefined)?.sessionId
  if (typeof sessionId !== 'string' || !uuidPattern.test(sessionId)) return
  await useDb().update(userSessions).set({ endedAt: new Date() }).where(and(eq(userSessions.id, sessionId), isNull(userSessions.endedAt)))
}

/** An admin ends every open session of user `id`: their browsers are signed out at the next request. */
export async function endUserSessions(audit: AuditContext, id: string) {
  return useDb().transaction(async (tx) => {
    const user = await tx.query.users.findFirst({ where: eq(users.id, id), columns: { id: true, email: true } })
    if (!user) throw problem(404, 'user-not-found', 'No such user.')
    const ended = await tx.update(userSessions).set({ endedAt: new Date() })
      .where(and(eq(userSessions.userId, id), isNull(userSessions.endedAt), gt(userSessions.expiresAt, sql`now()`)))
      .returning({ id: userSessions.id })
    await recordAudit(tx, { ...audit, action: 'user.sessions-ended', targetType: 'user', targetId: id, detail: { email: user.email, sessions: ended.length } })
    return { ended: ended.length }
  })
}

/** Open sessions per user, for the user list. */
export function openSessionCount() {
  return sql<number>`(select count(*)::int from ${userSessions} where ${userSessions.userId} = ${users.id} and ${userSessions.endedAt} is null and ${userSessions.expiresAt} > now())`
}

// Console changes (POST, PATCH, PUT, DELETE under /api/console) per user per minute, counted
// in PostgreSQL so the limit holds across app processes. A person clicking through the
// console makes a few a minute; a script driving a stolen session, thousands.
/** Counts one console change by `userId`; 429 with Retry-After past the limit. */
export async function consumeConsoleChange(userId: string) {
  const { perMinute, consolePerMinute } = useRuntimeConfig().rateLimit
  const points = Number(consolePerMinute)
  if (Number(perMinute) === 0 || points === 0) return
  await consumePerMinute('console', userId, points, seconds => `Too many console changes; retry in ${seconds} s.`)
}
