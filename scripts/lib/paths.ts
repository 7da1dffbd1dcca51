import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs'
import { randomBytes } from 'node:crypto'
import { dirname, join } from 'node:path'
import { fileURLToPath } from 'node:url'

export const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..')
export const dataDir = join(root, '.data')

export function log(message: string) {
  console.log(`[arcwise] ${message}`)
}

interface LocalSecrets { sessionPassword: string, pgPassword: string, sealingKeys: string, metricsToken: string }

/** A sealing keyring entry for NUXT_SEALING_KEYS: `id:secret`. */
export function newSealingKey(id: string): string {
  return `${id}:${randomBytes(32).toString('base64url')}`
}

/**
 * Secrets of this checkout, made once and kept under .data/ (never committed). A checkout
 * from before the sealing keyring gets one added, so development and tests seal with it.
 */
export function localSecrets(): LocalSecrets {
  const file = join(dataDir, 'secrets.json')
  const existing = existsSync(file) ? JSON.parse(readFileSync(file, 'utf8')) as Partial<LocalSecrets> : {}
  const secrets: LocalSecrets = {
    sessionPassword: existing.sessionPassword ?? randomBytes(32).toString('base64url'),
    pgPassword: existing.pgPassword ?? randomBytes(18).toString('base64url'),
    sealingKeys: existing.sealingKeys ?? newSealingKey('local1'),
    metricsToken: existing.metricsToken ?? randomBytes(24).toString('base64url'),
  }
  if (existing.sessionPassword !== secrets.sessionPassword || existing.pgPassword !== secrets.pgPassword || existing.sealingKeys !== secrets.sealingKeys || existing.metricsToken !== secrets.metricsToken) {
    mkdirSync(dirname(file), { recursive: true })
    writeFileSync(file, JSON.stringify(secrets, null, 2), { mode: 0o600 })
  }
  return secrets
}
