import { randomBytes, timingSafeEqual } from 'node:crypto'
import { and, desc, eq, isNull, sql } from 'drizzle-orm'
import type { ApiKeyInput, KeyScope } from '#shared/schemas/instruments'
import { apiKeys } from '../../database/schema'
import { consumeRateLimit } from './rateLimits'

// Lab keys: "awk_<prefix>_<secret>". The prefix (12 characters) finds the row; only the
// SHA-256 of the whole key is stored, and the key is shown once, when it is issued.


const publicColumns = {
  id: apiKeys.id, labId: apiKeys.labId, name: apiKeys.name, prefix: apiKeys.prefix, scopes: apiKeys.scopes,
  expiresAt: apiKeys.expiresAt, revokedAt: apiKeys.revokedAt, lastUsedAt: apiKeys.lastUsedAt, createdAt: apiKeys.createdAt,
}

export async function issueKey(audit: AuditContext, labId: string, input: ApiKeyInput) {
  const prefix = randomBytes(9).toString('base64url')
  const secret = `awk_${prefix}_${randomBytes(32).toString('base64url')}`
  return useDb().transaction(async (tx) => {
    const row = firstRow(await tx.insert(apiKeys).values({
      labId, name: input.name, prefix, secretHash: hashToken(secret), scopes: input.scopes, expiresAt: input.expiresAt ?? null, createdBy: audit.actor.id,
    }).returning(publicColumns))
    await recordAudit(tx, { ...audit, action: 'key.issued', targetType: 'api-key', targetId: row.id, detail: { labId, name: input.name, scopes: input.scopes, prefix } })
    return { ...row, secret }
  })
}

export function listKeys(labId: string) {
  return useDb().select(publicColumns).from(apiKeys).where(eq(apiKeys.labId, labId)).orderBy(desc(apiKeys.createdAt), desc(apiKeys.id))
}

export async function revokeKey(audit: AuditContext, labId: string, keyId: string) {
  const [row] = await useDb().update(apiKeys).set({ revokedAt: new Date() })
    .where(and(eq(apiKeys.id, keyId), eq(apiKeys.labId, labId), isNull(apiKeys.revokedAt))).returning(publicColumns)
  if (!row) throw problem(404, 'key-not-found', 'No active key with this id in this lab.')
  knownKeys.delete(row.prefix)
  await useDb().execute(sql`select pg_notify(${KEY_CHANNEL}, ${row.prefix})`)
  await recordAudit(useDb(), { ...audit, action: 'key.revoked', targetType: 'api-key', targetId: keyId, detail: { labId, prefix: row.prefix } })
  return row
}

// Key rows are kept in memory for a few seconds, so a lab system posting at full speed does
// not look its key up on every request. A revocation reaches every app process at once by
// NOTIFY; should the listening connection drop, its messages are lost until it is back
// (the cache is emptied then), and KEY_CACHE_MS bounds how long a revoked key could still
// pass. Nothing is cached before the listener is up.
const KEY_CHANNEL = 'arcwise_api_keys'
const KEY_CACHE_MS = 10_000
const knownKeys = new Map<string, { row: typeof apiKeys.$inferSelect, until: number }>()
let listener: Promise<unknown> | undefined
let listening = false

function watchRevocations() {
  listener ??= listenDb(KEY_CHANNEL, prefix => knownKeys.delete(prefix), () => { knownKeys.clear(); listening = true })
    .catch((error) => {
      listener = undefined
      logError('[keys] cannot listen for revocations; keys are looked up on every request', error)
    })
}

async function keyRow(prefix: string) {
  watchRevocations()
  const known = listening ? knownKeys.get(prefix) : undefined
  if (known && known.until > Date.now()) return known.row
  const row = await useDb().query.apiKeys.findFirst({ where: eq(apiKeys.prefix, prefix) })
  if (row && listening) {
    if (knownKeys.size >= 10_000) knownKeys.clear()
    knownKeys.set(prefix, { row, until: Date.now() + KEY_CACHE_MS })
  }
  return row
}

export interface LabKey { id: string, labId: string, scopes: KeyScope[], name: string }

// One answer for a wrong, revoked or expired key, so a caller learns nothing from it.
const invalidKey = () => problem(401, 'invalid-key', 'The API key is missing, wrong, revoked or expired.', { headers: { 'www-authenticate': 'Bearer realm="arcwise"' } })

/** The lab key an Authorization header (`Bearer awk_…`) carries, holding `scope`: 401, or 403 for a missing scope. */
export async function verifyLabKey(authorization: string | undefined, scope: KeyScope): Promise<LabKey> {
  const header = authorization ?? ''
  const match = /^Bearer (awk_([A-Za-z0-9_-]{12})_[A-Za-z0-9_-]{43})$/.exec(header)
  if (!match) throw invalidKey()
  const [, secret, prefix] = match
  const row = await keyRow(prefix!)
  if (!row) throw invalidKey()
  const same = timingSafeEqual(Buffer.from(row.secretHash, 'hex'), Buffer.from(hashToken(secret!), 'hex'))
  if (!same || row.revokedAt || (row.expiresAt && row.expiresAt <= new Date())) throw invalidKey()
  if (!row.scopes.includes(scope)) throw problem(403, 'insufficient-scope', `This key lacks the scope ${scope}.`)
  await consumeRateLimit('lab-key', row.id)
  // Last use is kept to the minute, so a busy key does not write on every request.
  if (!row.lastUsedAt || Date.now() - row.lastUsedAt.getTime() > 60_000) {
    row.lastUsedAt = new Date()
    await useDb().update(apiKeys).set({ lastUsedAt: row.lastUsedAt }).where(eq(apiKeys.id, row.id))
  }
  return { id: row.id, labId: row.labId, scopes: row.scopes as KeyScope[], name: row.name }
}
