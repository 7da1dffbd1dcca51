import { describe, expect, it } from 'vitest'
import { newPassword, signInInput } from '../../shared/schemas/auth'
import { email, slug } from '../../shared/schemas/common'
import { labInput, partnerInput } from '../../shared/schemas/orgs'
import { invitationInput, roleAssignment } from '../../shared/schemas/users'

const lab = '7f1c9a52-0c1e-4b8e-9a4e-2f0d3c1b5a61'
const partner = '0b6f2d7e-3a54-4c2b-8f61-9d2e7c4a1b30'

function pathsOf(result: { success: boolean, error?: { issues: { path: PropertyKey[] }[] } }) {
  return result.success ? [] : result.error!.issues.map(i => i.path.join('.'))
}

describe('role assignment', () => {
  it.each([
    [{ role: 'admin' }, []],
    [{ role: 'viewer' }, []],
    [{ role: 'lab_manager', labId: lab }, []],
    [{ role: 'integrator', partnerId: partner }, []],
    [{ role: 'lab_manager' }, ['labId']],
    [{ role: 'integrator' }, ['partnerId']],
    [{ role: 'viewer', labId: lab }, ['labId']],
    [{ role: 'admin', partnerId: partner }, ['partnerId']],
    [{ role: 'lab_manager', labId: 'not-a-uuid' }, ['labId']],
    [{ role: 'owner' }, ['role']],
  ])('%j -> errors at %j', (input, paths) => {
    expect(pathsOf(roleAssignment.safeParse(input))).toEqual(paths)
  })

  it('normalises a missing scope to null', () => {
    expect(roleAssignment.parse({ role: 'viewer' })).toEqual({ role: 'viewer', labId: null, partnerId: null })
  })

  it('an invitation names the field that is wrong', () => {
    expect(pathsOf(invitationInput.safeParse({ email: 'not an address', role: 'lab_manager' })).sort()).toEqual(['email', 'labId'])
  })
})

describe('passwords', () => {
  it.each([
    ['short', false],
    ['aaaaaaaaaaaaaaaa', false], // one repeated character
    ['password1234', false], // a well-known password
    ['PasswordPassword', false],
    ['correct horse battery', true],
    ['x'.repeat(201), false],
  ])('%s accepted: %s', (password, ok) => {
    expect(newPassword.safeParse(password).success).toBe(ok)
  })
})

describe('e-mail and slugs', () => {
  it('e-mail addresses are trimmed and lower-cased, so one person has one account', () => {
    expect(email.parse('  Ines.Varga@Saltmarsh.EXAMPLE ')).toBe('ines.varga@saltmarsh.example')
  })

  it.each([
    ['north-sea', true], ['lab-2', true], ['a', false], ['Upper', false], ['double--hyphen', false], ['-edge', false], ['spa ce', false],
  ])('slug %s valid: %s', (value, ok) => {
    expect(slug.safeParse(value).success).toBe(ok)
  })

  it('sign-in needs both fields', () => {
    expect(pathsOf(signInInput.safeParse({})).sort()).toEqual(['email', 'password'])
  })

  it('a lab needs a site and a partner a known kind', () => {
    expect(pathsOf(labInput.safeParse({ slug: 'ok-lab', name: 'OK', contactEmail: 'a@b.example' }))).toEqual(['site'])
    expect(pathsOf(partnerInput.safeParse({ slug: 'ok-p', name: 'OK', kind: 'bank', contactEmail: 'a@b.example' }))).toEqual(['kind'])
  })
})
