import { createCipheriv, createDecipheriv, hkdfSync, randomBytes } from 'node:crypto'

// Secrets kept at rest (token signing keys, webhook secrets) are sealed with AES-256-GCM
// (NIST SP 800-38D) under a sealing keyring kept apart from the session password, so neither
// a database dump nor the cookie secret alone reveals them. Sealed text:
//   v2.<key id>.<iv>.<tag>.<ciphertext>   (base64url parts; the key id names the keyring entry)
// Values sealed before the keyring existed are `v1.<iv>.<tag>.<ciphertext>` under a key
// derived from the session password; they still unseal until `npm run keys:rotate`.
// Pure functions: the server (seal.ts) and the rotation script share them.

export interface SealingKeyring {
  /** Entries in the order given; the last one seals. */
  keys: { id: string, key: Buffer }[]
  /** The pre-keyring key (from the session password), for v1 values only; never seals. */
  legacy?: Buffer
}

const keyIdPattern = /^[\w-]{1,32}$/

/** HKDF-SHA256 (RFC 5869) of a configured secret to a 256-bit AES key. */
function derive(secret: string, info: string): Buffer {
  return Buffer.from(hkdfSync('sha256', secret, 'arcwise-seal', info, 32))
}

/**
 * NUXT_SEALING_KEYS: comma-separated `id:secret` pairs, oldest first; the newest (last)
 * seals, every one unseals. Secrets are 32+ characters (e.g. `openssl rand -base64 32`).
 */
export function parseSealingKeys(text: string, sessionPassword?: string): SealingKeyring {
  const keys = text.split(',').map(s => s.trim()).filter(Boolean).map((pair) => {
    const colon = pair.indexOf(':')
    const id = colon > 0 ? pair.slice(0, colon) : ''
    const secret = colon > 0 ? pair.slice(colon + 1) : ''
    if (!keyIdPattern.test(id)) throw new Error('NUXT_SEALING_KEYS: each entry is id:secret, the id 1-32 letters, digits, _ or -')
    if (secret.length < 32) throw new Error(`NUXT_SEALING_KEYS: the secret of key "${id}" needs 32+ characters`)
    return { id, key: derive(secret, `arcwise sealing key ${id}`) }
  })
  if (new Set(keys.map(k => k.id)).size !== keys.length) throw new Error('NUXT_SEALING_KEYS: a key id appears twice')
  const legacy = sessionPassword && sessionPassword.length >= 32 ? derive(sessionPassword, 'arcwise secrets at rest v1') : undefined
  return { keys, legacy }
}

/** The key id a sealed value names ("v1" for pre-keyring values). */
export function sealedKeyId(sealed: string): string {
  const [version, id] = sealed.split('.')
  return version === 'v2' ? id ?? '' : 'v1'
}

function encrypt(key: Buffer, plain: string) {
  const iv = randomBytes(12)
  const cipher = createCipheriv('aes-256-gcm', key, iv)
  const body = Buffer.concat([cipher.update(plain, 'utf8'), cipher.final()])
  return [iv.toString('base64url'), cipher.getAuthTag().toString('base64url'), body.toString('base64url')]
}

function decrypt(key: Buffer, iv: string, tag: string, body: string): string {
  const decipher = createDecipheriv('aes-256-gcm', key, Buffer.from(iv, 'base64url'))
  decipher.setAuthTag(Buffer.from(tag, 'base64url'))
  return Buffer.concat([decipher.update(Buffer.from(body, 'base64url')), decipher.final()]).toString('utf8')
}

/** Seals with the newest key of the ring; with no keyring configured, with the legacy key (v1). */
export function sealWith(ring: SealingKeyring, plain: string): string {
  const newest = ring.keys.at(-1)
  if (newest) return ['v2', newest.id, ...encrypt(newest.key, plain)].join('.')
  if (ring.legacy) return ['v1', ...encrypt(ring.legacy, plain)].join('.')
  throw new Error('no sealing key: set NUXT_SEALING_KEYS')
}

export function unsealWith(ring: SealingKeyring, sealed: string): string {
  const parts = sealed.split('.')
  if (parts[0] === 'v1' && parts.length === 4) {
    if (!ring.legacy) throw new Error('a v1 sealed value needs the session password it was sealed under')
    return decrypt(ring.legacy, parts[1]!, parts[2]!, parts[3]!)
  }
  if (parts[0] === 'v2' && parts.length === 5) {
    const entry = ring.keys.find(k => k.id === parts[1])
    if (!entry) throw new Error(`sealed with key "${parts[1]}", which NUXT_SEALING_KEYS does not hold`)
    return decrypt(entry.key, parts[2]!, parts[3]!, parts[4]!)
  }
  throw new Error('not a sealed value')
}

/** Whether a value is sealed with the ring's newest key already (rotation skips it). */
export function sealedWithNewest(ring: SealingKeyring, sealed: string): boolean {
  const newest = ring.keys.at(-1)
  return newest ? sealedKeyId(sealed) === newest.id && sealed.startsWith('v2.') : sealed.startsWith('v1.')
}
