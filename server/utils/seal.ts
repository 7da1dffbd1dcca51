import { createCipheriv, createDecipheriv, hkdfSync, randomBytes } from 'node:crypto'

// Secrets kept at rest (signing keys, webhook secrets) are sealed with AES-256-GCM under a
// key derived (HKDF-SHA256, RFC 5869) from the deployment's secret, so a database dump
// alone does not reveal them.
function sealingKey(): Buffer {
  const secret = process.env.NUXT_SEALING_SECRET || useRuntimeConfig().session?.password || process.env.NUXT_SESSION_PASSWORD
  if (!secret || String(secret).length < 32) throw new Error('NUXT_SESSION_PASSWORD (32+ characters) is needed to seal secrets')
  return Buffer.from(hkdfSync('sha256', String(secret), 'arcwise-seal', 'arcwise secrets at rest v1', 32))
}

export function seal(plain: string): string {
  const iv = randomBytes(12)
  const cipher = createCipheriv('aes-256-gcm', sealingKey(), iv)
  const body = Buffer.concat([cipher.update(plain, 'utf8'), cipher.final()])
  return ['v1', iv.toString('base64url'), cipher.getAuthTag().toString('base64url'), body.toString('base64url')].join('.')
}

export function unseal(sealed: string): string {
  const [version, iv, tag, body] = sealed.split('.')
  if (version !== 'v1' || !iv || !tag || !body) throw new Error('not a sealed value')
  const decipher = createDecipheriv('aes-256-gcm', sealingKey(), Buffer.from(iv, 'base64url'))
  decipher.setAuthTag(Buffer.from(tag, 'base64url'))
  return Buffer.concat([decipher.update(Buffer.from(body, 'base64url')), decipher.final()]).toString('utf8')
}
