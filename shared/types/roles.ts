/**
 * The console roles. A lab manager and a lab reviewer belong to one lab, an integrator to one
 * partner. A lab reviewer authorises (releases, rejects, retracts) the lab's results and reads
 * the lab; it changes nothing else (ISO/IEC 17025:2017 §7.8.1, authorisation of results).
 */
export const roles = ['admin', 'lab_manager', 'lab_reviewer', 'integrator', 'viewer'] as const
export type Role = (typeof roles)[number]

/** The roles that belong to one lab: another lab's records answer 404 to them. */
export const labScopedRoles = ['lab_manager', 'lab_reviewer'] as const satisfies readonly Role[]
export function isLabScoped(role: Role | undefined | null): boolean {
  return !!role && (labScopedRoles as readonly Role[]).includes(role)
}

export const roleLabels: Record<Role, string> = {
  admin: 'Admin',
  lab_manager: 'Lab manager',
  lab_reviewer: 'Lab reviewer',
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
  'labs:read': ['admin', 'viewer', 'lab_manager', 'lab_reviewer'],
  'labs:create': ['admin'],
  'labs:update': ['admin', 'lab_manager'],
  // A lab's instruments, calibrations, keys, partner grants and uploads (a lab manager: their own lab only).
  'labs:manage': ['admin', 'lab_manager'],
  'partners:read': ['admin', 'viewer', 'integrator'],
  'partners:create': ['admin'],
  'partners:update': ['admin', 'integrator'],
  'audit:read': ['admin', 'viewer'],
  // Release, reject and retract a lab's results and sequences (their own lab only).
  'results:review': ['lab_manager', 'lab_reviewer'],
  // Start reprocessing jobs and correct released results (their own lab only).
  'results:reprocess': ['admin', 'lab_manager'],
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
