import type { H3Event } from 'h3'
import type { KeyScope } from '#shared/schemas/instruments'
import type { PartnerScope } from '#shared/schemas/partners'
import type { LabKey } from '../services/access'
import type { PartnerToken } from '../services/partners'
import { eq } from 'drizzle-orm'
import { labs, partners } from '../database/schema'
import { can, isLabScoped, permissions, type Permission, type Role, type SessionUser } from '#shared/types/roles'

/**
 * The signed-in user, reloaded from the database with their session row so that role
 * changes, disabling, sign-out and ended sessions act at once. 401 otherwise. A console
 * change (any verb but GET and HEAD) counts against the user's per-minute limit.
 */
export async function requireUser(event: H3Event): Promise<SessionUser> {
  if (event.context.user) return event.context.user as SessionUser
  const session = await getUserSession(event)
  if (!session.user) throw problem(401, 'not-signed-in', 'Sign in to continue.')
  const row = await userOfOpenSession(session)
  if (!row) {
    await clearUserSession(event)
    throw problem(401, 'not-signed-in', 'Your session has ended; sign in again.')
  }
  const user: SessionUser = { id: row.id, email: row.email, name: row.name, role: row.role, labId: row.labId, partnerId: row.partnerId }
  if (event.path.startsWith('/api/console/') && event.method !== 'GET' && event.method !== 'HEAD') await consumeConsoleChange(user.id)
  event.context.user = user
  return user
}

/** The signed-in user when their role is one of `allowed`; 401 signed out, 403 otherwise. */
export async function requireRole(event: H3Event, ...allowed: Role[]): Promise<SessionUser> {
  const user = await requireUser(event)
  if (!allowed.includes(user.role)) throw problem(403, 'forbidden', 'Your role may not do this.')
  return user
}

/** The signed-in user when their role holds `permission` in the shared permission table. */
export function requirePermission(event: H3Event, permission: Permission): Promise<SessionUser> {
  return requireRole(event, ...permissions[permission])
}

/**
 * The signed-in user when they may see (or, with `write`, change) lab `labId`'s instruments
 * and keys (with `review`, release its results; with `reprocess`, start reprocessing jobs):
 * admins any lab, viewers read any, a lab manager or lab reviewer only their own (another lab
 * is 404, as if it were not there); integrators never.
 */
const labAccessPermission = { read: 'labs:read', write: 'labs:manage', review: 'results:review', reprocess: 'results:reprocess' } as const satisfies Record<string, Permission>

export async function requireLabAccess(event: H3Event, labId: string, access: keyof typeof labAccessPermission): Promise<SessionUser> {
  const user = await requireUser(event)
  if (isLabScoped(user.role) && user.labId !== labId) throw problem(404, 'lab-not-found', 'No such lab.')
  if (!can(user.role, labAccessPermission[access])) throw problem(403, 'forbidden', 'Your role may not do this.')
  const lab = await useDb().query.labs.findFirst({ where: eq(labs.id, labId), columns: { id: true } })
  if (!lab) throw problem(404, 'lab-not-found', 'No such lab.')
  return user
}

/**
 * The signed-in user when they may see (or, with `write`, change) partner `partnerId`'s
 * clients: admins any partner, viewers read any, an integrator only their own (another is
 * 404); lab managers never.
 */
export async function requirePartnerAccess(event: H3Event, partnerId: string, access: 'read' | 'write'): Promise<SessionUser> {
  const user = await requireUser(event)
  if (user.role === 'integrator' && user.partnerId !== partnerId) throw problem(404, 'partner-not-found', 'No such partner.')
  if (!can(user.role, access === 'read' ? 'partners:read' : 'partners:update')) throw problem(403, 'forbidden', 'Your role may not do this.')
  const partner = await useDb().query.partners.findFirst({ where: eq(partners.id, partnerId), columns: { id: true } })
  if (!partner) throw problem(404, 'partner-not-found', 'No such partner.')
  return user
}

/** The lab key of the request (`Authorization: Bearer awk_…`) holding `scope`: 401, or 403 for a missing scope. */
export function requireLabKey(event: H3Event, scope: KeyScope): Promise<LabKey> {
  return verifyLabKey(getRequestHeader(event, 'authorization'), scope)
}

/** The partner of the request's access token holding `scope`: 401 (a presented token refused is audited), or 403 for a missing scope. */
export function requirePartnerToken(event: H3Event, scope: PartnerScope): Promise<PartnerToken> {
  return verifyPartnerToken({ authorization: getRequestHeader(event, 'authorization'), audit: auditContext(event), path: event.path }, scope)
}
