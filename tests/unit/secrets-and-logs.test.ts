import { describe, expect, it } from 'vitest'
import { getTableColumns, getTableName, is } from 'drizzle-orm'
import { PgTable } from 'drizzle-orm/pg-core'
import { DrizzleQueryError } from 'drizzle-orm/errors'
import * as schema from '../../server/database/schema'
import { parseSealingKeys, sealWith, sealedKeyId, sealedWithNewest, unsealWith } from '../../server/utils/keyring'
import { safeErrorChain, unexpectedErrorLine } from '../../server/utils/errorLog'
import { sealedColumns } from '../../scripts/lib/rotate-keys'

const secretA = 'a'.repeat(40)
const secretB = 'b'.repeat(40)
const password = 'p'.repeat(40)

describe('the sealing keyring', () => {
  it('seals with the newest key, names it in the sealed text, and every key of the ring opens what it sealed', () => {
    const old = parseSealingKeys(`k1:${secretA}`)
    const both = parseSealingKeys(`k1:${secretA},k2:${secretB}`)
    const sealedOld = sealWith(old, 'whsec_x')
    const sealedNew = sealWith(both, 'whsec_y')
    expect(sealedKeyId(sealedOld)).toBe('k1')
    expect(sealedKeyId(sealedNew)).toBe('k2')
    expect(unsealWith(both, sealedOld)).toBe('whsec_x')
    expect(unsealWith(both, sealedNew)).toBe('whsec_y')
    expect(() => unsealWith(old, sealedNew)).toThrow(/"k2"/)
    expect(sealedWithNewest(both, sealedOld)).toBe(false)
    expect(sealedWithNewest(both, sealedNew)).toBe(true)
  })

  it('opens values sealed before the keyring (v1, from the session password) and never seals with that key when a ring is set', () => {
    const legacy = parseSealingKeys('', password)
    const v1 = sealWith(legacy, 'old secret')
    expect(v1.startsWith('v1.')).toBe(true)
    const ring = parseSealingKeys(`k1:${secretA}`, password)
    expect(unsealWith(ring, v1)).toBe('old secret')
    expect(sealWith(ring, 'new').startsWith('v2.k1.')).toBe(true)
  })

  it('a tampered sealed value or one under the wrong key does not open', () => {
    const ring = parseSealingKeys(`k1:${secretA}`)
    const sealed = sealWith(ring, 'secret')
    const parts = sealed.split('.')
    parts[4] = Buffer.from('tampered').toString('base64url')
    expect(() => unsealWith(ring, parts.join('.'))).toThrow()
    expect(() => unsealWith(parseSealingKeys(`k1:${secretB}`), sealed)).toThrow()
  })

  it.each([
    ['a short secret', 'k1:short'],
    ['no id', `:${secretA}`],
    ['an id with a dot', `k.1:${secretA}`],
    ['the same id twice', `k1:${secretA},k1:${secretB}`],
  ])('refuses a keyring with %s', (_what, text) => {
    expect(() => parseSealingKeys(text)).toThrow(/NUXT_SEALING_KEYS/)
  })

  it('keys:rotate knows every sealed column of the schema', () => {
    const inSchema = Object.values(schema as Record<string, unknown>).filter((t): t is PgTable => is(t, PgTable))
      .flatMap(t => Object.values(getTableColumns(t)).filter(c => c.name.includes('sealed')).map(c => `${getTableName(t)}.${c.name}`))
    const rotated = sealedColumns.flatMap(t => t.columns.map(c => `${t.table}.${c}`))
    expect(rotated.sort()).toEqual(inSchema.sort())
  })
})

describe('error logs', () => {
  it('an unexpected database error is logged without its bound parameters or the request\'s query string', () => {
    const cause = Object.assign(new Error('duplicate key value violates unique constraint'), { code: '23505', parameters: ['s3cr3t-token'] })
    const error = new DrizzleQueryError('insert into "users" ("email", "password_hash") values ($1, $2)', ['victim@example.org', '$scrypt$hash'], cause)
    const line = unexpectedErrorLine(error, 'POST', '/api/console/session?token=abc123')
    expect(line).not.toContain('victim@example.org')
    expect(line).not.toContain('$scrypt$hash')
    expect(line).not.toContain('s3cr3t-token')
    expect(line).not.toContain('abc123')
    const parsed = JSON.parse(line)
    expect(parsed.path).toBe('/api/console/session')
    expect(parsed.errors[0].message).toContain('insert into "users"')
    expect(parsed.errors[1]).toMatchObject({ code: '23505', message: 'duplicate key value violates unique constraint' })
  })

  it('a thrown non-error is logged as text', () => {
    expect(safeErrorChain('plain failure')).toEqual([{ name: 'string', message: 'plain failure' }])
  })
})
