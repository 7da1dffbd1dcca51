import type { H3Event } from 'h3'
import { can, type Permission, type SessionUser } from '#shared/types/roles'

/**
 * The signed-in user when they may read lab `labId` and their role holds `permission`
 * (results:reprocess, results:review): a lab manager or lab reviewer of another lab gets 404,
 * as if it were not there; a role without the permission 403.
 */
export async function requireLabPermission(event: H3Event, labId: string, permission: Permission): Promise<SessionUser> {
  const user = await requireLabAccess(event, labId, 'read')
  if ((user.role === 'lab_manager' || user.role === 'lab_reviewer') && user.labId !== labId) throw problem(404, 'lab-not-found', 'No such lab.')
  if (!can(user.role, permission)) throw problem(403, 'forbidden', 'Your role may not do this.')
  return user
}
