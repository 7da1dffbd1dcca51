import { spawnSync } from 'node:child_process'
import { randomBytes } from 'node:crypto'
import { join } from 'node:path'
import { Hash } from '@adonisjs/hash'
import { Scrypt } from '@adonisjs/hash/drivers/scrypt'
import { describe, expect, it } from 'vitest'
import { parseSealingKeys, sealWith } from '../../server/utils/keyring'
import { demoUser } from '../support/demo'
import { rootDir, testEnv } from '../support/env'
import { ConsoleClient, startAppProcess, testDb, unique, useArcwise, waitForMail } from '../support/server'
import { grantedPartnerWithEndpoint, until } from '../support/webhooks'

const HOOK = '127.0.0.1:4997'
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: HOOK } })

const env = testEnv().serverEnv
const keyId = env.NUXT_SEALING_KEYS!.split(',').at(-1)!.split(':')[0]!

/** `npm run keys:rotate` against the test database with the given keyring. */
function rotate(sealingKeys: string) {
  const run = spawnSync(join(rootDir, 'node_modules', '.bin', 'tsx'), ['scripts/keys-rotate.ts'], {
    cwd: rootDir, encoding: 'utf8',
    env: { ...process.env, DATABASE_URL: testEnv().databaseUrl, NUXT_SEALING_KEYS: sealingKeys, NUXT_SESSION_PASSWORD: env.NUXT_SESSION_PASSWORD },
  })
  expect(run.status, run.stderr).toBe(0)
  return run.stdout
}

const sealedSecretOf = async (id: string) => (await testDb()`select sealed_secret from webhook_endpoints where id = ${id}`)[0]!.sealed_secret as string

describe('secrets at rest', () => {
  it('a webhook secret is stored sealed under the newest sealing key, named in the stored value, never in plain', async () => {
    const { endpoint } = await grantedPartnerWithEndpoint(`http://${HOOK}/new`)
    const stored = await sealedSecretOf(endpoint.id)
    expect(stored.startsWith(`v2.${keyId}.`)).toBe(true)
    expect(stored).not.toContain(endpoint.secret.slice(6))
    const [signing] = await testDb()`select sealed_private_jwk from signing_keys order by created_at desc limit 1`
    if (signing) expect(signing.sealed_private_jwk.startsWith('v2.')).toBe(true)
  })

  it('a secret sealed under the old session-password key still opens, and keys:rotate moves it to the newest key', async () => {
    const { admin, partner, endpoint } = await grantedPartnerWithEndpoint(`http://${HOOK}/legacy`)
    const legacySecret = `whsec_${randomBytes(32).toString('base64')}`
    const legacyRing = parseSealingKeys('', env.NUXT_SESSION_PASSWORD)
    await testDb()`update webhook_endpoints set sealed_secret = ${sealWith(legacyRing, legacySecret)} where id = ${endpoint.id}`
    const reveal = () => admin.post(`/api/console/partners/${partner.id}/endpoints/${endpoint.id}/secret/reveal`)
    expect((await reveal()).body.secret).toBe(legacySecret)

    expect(rotate(env.NUXT_SEALING_KEYS!)).toMatch(/re-sealed [1-9]\d* value/)
    const stored = await sealedSecretOf(endpoint.id)
    expect(stored.startsWith(`v2.${keyId}.`)).toBe(true)
    expect((await reveal()).body.secret).toBe(legacySecret)
  })

  it('after a new key is added and keys:rotate runs, every value names the new key and still opens; the old key can then go', async () => {
    const { admin, partner, endpoint } = await grantedPartnerWithEndpoint(`http://${HOOK}/rotated`)
    const newRing = `${env.NUXT_SEALING_KEYS},next:${randomBytes(32).toString('base64url')}`
    const port = testEnv().appPort + 7
    const second = startAppProcess(port, { NUXT_SEALING_KEYS: newRing, NUXT_PROCESS_ROLE: 'web' })
    try {
      await until('the second process', async () => (await fetch(`http://127.0.0.1:${port}/api/health`).catch(() => undefined))?.ok)
      expect(rotate(newRing)).toMatch(/with key "next"/)
      expect((await sealedSecretOf(endpoint.id)).startsWith('v2.next.')).toBe(true)
      const [left] = await testDb()`select count(*)::int as n from webhook_endpoints where sealed_secret not like 'v2.next.%'`
      expect(left!.n).toBe(0)
      const revealed = await fetch(`http://127.0.0.1:${port}/api/console/partners/${partner.id}/endpoints/${endpoint.id}/secret/reveal`, { method: 'POST', headers: { cookie: admin.cookie } })
      expect(revealed.status).toBe(200)
      expect((await revealed.json()).secret).toBe(endpoint.secret)
    }
    finally {
      second.kill('SIGTERM')
      // Back to the test keyring's key, for the test files that follow.
      rotate(`${newRing.split(',').at(-1)},${env.NUXT_SEALING_KEYS}`)
    }
    expect((await sealedSecretOf(endpoint.id)).startsWith(`v2.${keyId}.`)).toBe(true)
  })
})

describe('links in sent mail', () => {
  it('a reset link is not left readable in the mail outbox once the mail is sent', async () => {
    const email = `${unique('resetter')}@example.org`
    await testDb()`insert into users (email, name, password_hash, role) values (${email}, 'Reset Test', 'scrypt-not-a-real-hash', 'viewer')`
    expect((await new ConsoleClient().post('/api/console/password-resets', { email })).status).toBeLessThan(300)
    const mail = await waitForMail(email, /reset/i)
    const token = /\/reset\/([\w-]{43})/.exec(mail.text)![1]!
    const row = await until('the outbox to mark it sent', async () => {
      const [r] = await testDb()`select status, text, html from mail_outbox where "to" = ${email}`
      return r?.status === 'sent' ? r : undefined
    })
    expect(row.text).not.toContain(token)
    expect(row.html).not.toContain(token)
    expect(row.text).toContain('[link removed after sending]')
    expect(row.text).toContain('reset the password')
  })
})

describe('password hashing', () => {
  it('new passwords are hashed with scrypt at N=2^17, r=8, p=1 (OWASP Password Storage Cheat Sheet)', async () => {
    const [row] = await testDb()`select password_hash from users where email = ${demoUser('viewer').email}`
    expect(row!.password_hash).toMatch(/^\$scrypt\$n=131072,r=8,p=1\$/)
  })

  it('a password hashed at an older, cheaper cost still signs in and is re-hashed at OWASP\'s cost', async () => {
    const email = `${unique('oldhash')}@example.org`
    const password = 'an old but good passphrase'
    const oldHash = await new Hash(new Scrypt({ cost: 16384, blockSize: 8, parallelization: 1 })).make(password)
    await testDb()`insert into users (email, name, password_hash, role) values (${email}, 'Old Hash', ${oldHash}, 'viewer')`
    await new ConsoleClient().signIn(email, password)
    const [row] = await testDb()`select password_hash from users where email = ${email}`
    expect(row!.password_hash).toMatch(/^\$scrypt\$n=131072,r=8,p=1\$/)
    expect((await new ConsoleClient().post('/api/console/session', { email, password })).status).toBe(200)
  })
})
