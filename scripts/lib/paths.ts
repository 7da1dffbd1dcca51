import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs'
import { randomBytes } from 'node:crypto'
import { dirname, join } from 'node:path'
import { fileURLToPath } from 'node:url'

export const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..')
export const dataDir = join(root, '.data')

export function log(message: string) {
  console.log(`[arcwise] ${message}`)
}

interface LocalSecrets { sessionPassword: string, pgPassword: string }

/** Secrets of this checkout, made once and kept under .data/ (never committed). */
export function localSecrets(): LocalSecrets {
  const file = join(dataDir, 'secrets.json')
  if (existsSync(file)) return JSON.parse(readFileSync(file, 'utf8')) as LocalSecrets
  mkdirSync(dirname(file), { recursive: true })
  const secrets = {
    sessionPassword: randomBytes(32).toString('base64url'),
    pgPassword: randomBytes(18).toString('base64url'),
  }
  writeFileSync(file, JSON.stringify(secrets, null, 2), { mode: 0o600 })
  return secrets
}
