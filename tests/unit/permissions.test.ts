import { describe, expect, it } from 'vitest'
import { can, permissions, roles } from '../../shared/types/roles'

describe('permission table', () => {
  it('only admins change users', () => {
    expect(roles.filter(r => can(r, 'users:write'))).toEqual(['admin'])
  })

  it('viewers read but never write', () => {
    const writes = Object.keys(permissions).filter(p => !p.endsWith(':read')) as (keyof typeof permissions)[]
    expect(writes.filter(p => can('viewer', p))).toEqual([])
    expect(can('viewer', 'audit:read')).toBe(true)
  })

  it.each([
    ['lab_manager', 'labs:update', true], ['lab_manager', 'labs:manage', true], ['lab_manager', 'partners:read', false], ['lab_manager', 'audit:read', false],
    ['integrator', 'labs:manage', false],
    ['integrator', 'partners:update', true], ['integrator', 'labs:read', false], ['integrator', 'users:read', false],
  ] as const)('%s %s: %s', (role, permission, allowed) => {
    expect(can(role, permission)).toBe(allowed)
  })

  it('nobody signed out can do anything', () => {
    for (const p of Object.keys(permissions) as (keyof typeof permissions)[]) expect(can(null, p)).toBe(false)
  })
})
