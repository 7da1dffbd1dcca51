import { demoUsers } from '../../scripts/lib/demo'
import type { Role } from '../../shared/types/roles'

/** The demo seed's user of each role (scripts/test.ts seeds the test database with it). */
export function demoUser(role: Role) {
  const user = demoUsers.find(u => u.role === role)
  if (!user) throw new Error(`no demo user with role ${role}`)
  return user
}
