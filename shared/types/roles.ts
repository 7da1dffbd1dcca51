/** The console roles. A lab manager belongs to one lab, an integrator to one partner. */
export const roles = ['admin', 'lab_manager', 'integrator', 'viewer'] as const
export type Role = (typeof roles)[number]

export const roleLabels: Record<Role, string> = {
  admin: 'Admin',
  lab_manager: 'Lab manager',
  integrator: 'Integrator',
  viewer: 'Viewer',
}

/**
 * What each role may do in the console. Server guards and the console's menu and route
 * middleware both read this table, so they cannot disagree.
 */
export const permissions = {
  'users:read': ['admin', 'viewer'],
  'users:write': ['admin'],
  'labs:read': ['admin', 'viewer', 'lab_manager'],
  'labs:create': ['admin'],
  'labs:update': ['admin', 'lab_manager'],
  // A lab's instruments, calibrations, keys, partner grants and uploads (a lab manager: their own lab only).
  'labs:manage': ['admin', 'lab_manager'],
  'partners:read': ['admin', 'viewer', 'integrator'],
  'partners:create': ['admin'],
  'partners:update': ['admin', 'integrator'],
  'audit:read': ['admin', 'viewer'],
} as const satisfies Record<string, readonly Role[]>

export type Permission = keyof typeof permissions

export function can(role: Role | undefined | null, permission: Permission): boolean {
  return !!role && (permissions[permission] as readonly Role[]).includes(role)
}

/** The signed-in user as the session and the console see it. */
export interface SessionUser {
  id: string
  email: string
  name: string
  role: Role
  labId: string | null
  partnerId: string | null
}
