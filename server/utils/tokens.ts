import { createHash, randomBytes } from 'node:crypto'

/** A link token: 32 random bytes, base64url (43 characters). Only its SHA-256 is stored. */
export function newLinkToken(): { token: string, hash: string } {
  const token = randomBytes(32).toString('base64url')
  return { token, hash: hashToken(token) }
}

/** SHA-256 (hex) of a secret: link tokens, lab keys and partner client secrets are stored only so. */
export function hashToken(token: string): string {
  return createHash('sha256').update(token).digest('hex')
}
