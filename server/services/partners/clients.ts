import { randomBytes, randomUUID, timingSafeEqual } from 'node:crypto'
import { and, desc, eq, isNull } from 'drizzle-orm'
import { SignJWT, exportJWK, generateKeyPair, importJWK, jwtVerify, type JWK } from 'jose'
import type { PartnerClientInput, PartnerScope } from '#shared/schemas/partners'
import { partnerClients, signingKeys } from '../../database/schema'
import { consumeRateLimit } from '../access'

// Partners authenticate with OAuth 2.0 client credentials (RFC 6749 §4.4) and get a
// short-lived JWT access token in the RFC 9068 profile, signed by the hub (ES256, jose).
// The public keys are at /.well-known/jwks.json.

export const TOKEN_TTL_SECONDS = 300
const ALG = 'ES256'
const issuer = () => useRuntimeConfig().appUrl
export const AUDIENCE = 'arcwise-api-v1'

export interface ActiveKey { kid: string, privateKey: CryptoKey, publicJwk: JWK }
let active: Promise<ActiveKey> | undefined

/** The current signing key, made on first use and shared by every app process through the database (access tokens and certificates of analysis). */
export function signingKey(): Promise<ActiveKey> {
  active ??= (async () => {
    const db = useDb()
    let [row] = await db.select().from(signingKeys).where(isNull(signingKeys.retiredAt)).orderBy(desc(signingKeys.createdAt)).limit(1)
    if (!row) {
      const { publicKey, privateKey } = await generateKeyPair(ALG, { extractable: true })
      const kid = randomUUID()
      const publicJwk = { ...await exportJWK(publicKey), kid, alg: ALG, use: 'sig' }
      await db.insert(signingKeys).values({ kid, alg: ALG, publicJwk, sealedPrivateJwk: seal(JSON.stringify(await exportJWK(privateKey))) }).onConflictDoNothing()
      ;[row] = await db.select().from(signingKeys).where(isNull(signingKeys.retiredAt)).orderBy(desc(signingKeys.createdAt)).limit(1)
    }
    const privateKey = await importJWK(JSON.parse(unseal(row!.sealedPrivateJwk)) as JWK, ALG) as CryptoKey
    return { kid: row!.kid, privateKey, publicJwk: row!.publicJwk as JWK }
  })().catch((error) => { active = undefined; throw error })
  return active
}

export async function jwks() {
  const rows = await useDb().select({ jwk: signingKeys.publicJwk }).from(signingKeys).orderBy(desc(signingKeys.createdAt))
  if (!rows.length) await signingKey()
  const all = rows.length ? rows : await useDb().select({ jwk: signingKeys.publicJwk }).from(signingKeys)
  return { keys: all.map(r => r.jwk) }
}

const publicColumns = {
  id: partnerClients.id, partnerId: partnerClients.partnerId, name: partnerClients.name, clientId: partnerClients.clientId,
  scopes: partnerClients.scopes, revokedAt: partnerClients.revokedAt, lastUsedAt: partnerClients.lastUsedAt, createdAt: partnerClients.createdAt,
}

export async function createPartnerClient(audit: AuditContext, partnerId: string, input: PartnerClientInput) {
  const clientId = `awc_${randomBytes(9).toString('base64url')}`
  const secret = `awcs_${randomBytes(32).toString('base64url')}`
  return useDb().transaction(async (tx) => {
    const row = firstRow(await tx.insert(partnerClients).values({ partnerId, name: input.name, clientId, secretHash: hashToken(secret), scopes: input.scopes, createdBy: audit.actor.id }).returning(publicColumns))
    await recordAudit(tx, { ...audit, action: 'partner-client.created', targetType: 'partner-client', targetId: row.id, detail: { partnerId, clientId } })
    return { ...row, clientSecret: secret }
  })
}

export function listPartnerClients(partnerId: string) {
  return useDb().select(publicColumns).from(partnerClients).where(eq(partnerClients.partnerId, partnerId)).orderBy(desc(partnerClients.createdAt))
}

export async function revokePartnerClient(audit: AuditContext, partnerId: string, id: string) {
  const [row] = await useDb().update(partnerClients).set({ revokedAt: new Date() })
    .where(and(eq(partnerClients.id, id), eq(partnerClients.partnerId, partnerId), isNull(partnerClients.revokedAt))).returning(publicColumns)
  if (!row) throw problem(404, 'client-not-found', 'No active client with this id for this partner.')
  await recordAudit(useDb(), { ...audit, action: 'partner-client.revoked', targetType: 'partner-client', targetId: id, detail: { partnerId } })
  return row
}

/** RFC 6749 §5.2 error members, carried inside an RFC 9457 problem document. */
function oauthProblem(status: number, error: string, description: string) {
  const p = problem(status, `oauth-${error}`, description, status === 401 ? { headers: { 'www-authenticate': 'Basic realm="arcwise"' } } : {})
  Object.assign((p.data as { problem: Record<string, unknown> }).problem, { error, error_description: description })
  return p
}

/**
 * Client credentials from an HTTP Basic header (RFC 6749 §2.3.1: id and secret each
 * form-urlencoded, joined by a colon, base64). Undefined without a Basic header; a Basic
 * header that does not decode to a non-empty id and a colon is 401 invalid_client.
 */
export function basicCredentials(header: string | undefined): { id: string, secret: string } | undefined {
  const [scheme, encoded, ...rest] = (header ?? '').trim().split(/ +/)
  if (scheme?.toLowerCase() !== 'basic') return undefined
  const malformed = () => oauthProblem(401, 'invalid_client', 'The Basic authorization header is malformed: base64 of client_id:client_secret is expected.')
  if (!encoded || rest.length || encoded.length > 4096 || !/^[A-Za-z0-9+/]+={0,2}$/.test(encoded) || encoded.length % 4 !== 0) throw malformed()
  const decoded = Buffer.from(encoded, 'base64').toString('utf8')
  const colon = decoded.indexOf(':')
  if (colon <= 0) throw malformed()
  try { return { id: decodeURIComponent(decoded.slice(0, colon).replaceAll('+', ' ')), secret: decodeURIComponent(decoded.slice(colon + 1).replaceAll('+', ' ')) } }
  catch { throw malformed() }
}

/** Who asked for a token, as the audit log names them: the client id given, cut short. */
const clientActor = (clientId: string | undefined) => ({ id: null, label: `client:${(clientId ?? '(none)').slice(0, 80)}` })

/** The token endpoint: client credentials in, an RFC 9068 access token out. Issued and refused tokens are audited. */
export async function issueAccessToken(audit: AuditContext, credentials: { clientId?: string, clientSecret?: string, grantType?: string, scope?: string }) {
  if (credentials.grantType !== 'client_credentials') throw oauthProblem(400, 'unsupported_grant_type', 'Only grant_type=client_credentials is supported.')
  const row = credentials.clientId ? await useDb().query.partnerClients.findFirst({ where: eq(partnerClients.clientId, credentials.clientId) }) : undefined
  const ok = row && !row.revokedAt && credentials.clientSecret
    && timingSafeEqual(Buffer.from(row.secretHash, 'hex'), Buffer.from(hashToken(credentials.clientSecret), 'hex'))
  if (!ok) {
    await recordAudit(useDb(), { ...audit, actor: clientActor(credentials.clientId), action: 'token.refused', targetType: 'partner-client', targetId: row?.id,
      detail: { reason: !row ? 'unknown-client' : row.revokedAt ? 'revoked-client' : 'wrong-secret' } })
    throw oauthProblem(401, 'invalid_client', 'The client id or secret is wrong, or the client was revoked.')
  }
  const asked = credentials.scope ? credentials.scope.split(' ').filter(Boolean) : row.scopes
  const denied = asked.filter(s => !row.scopes.includes(s))
  if (denied.length) {
    await recordAudit(useDb(), { ...audit, actor: clientActor(row.clientId), action: 'token.refused', targetType: 'partner-client', targetId: row.id,
      detail: { reason: 'scope-not-allowed', denied: denied.slice(0, 10).map(s => s.slice(0, 60)) } })
    throw oauthProblem(400, 'invalid_scope', `This client may not ask for ${denied.join(', ')}.`)
  }
  const key = await signingKey()
  const now = Math.floor(Date.now() / 1000)
  const token = await new SignJWT({ client_id: row.clientId, scope: asked.join(' '), partner_id: row.partnerId })
    .setProtectedHeader({ alg: ALG, typ: 'at+jwt', kid: key.kid })
    .setIssuer(issuer()).setAudience(AUDIENCE).setSubject(row.clientId)
    .setIssuedAt(now).setExpirationTime(now + TOKEN_TTL_SECONDS).setJti(randomUUID())
    .sign(key.privateKey)
  await useDb().update(partnerClients).set({ lastUsedAt: new Date() }).where(eq(partnerClients.id, row.id))
  await recordAudit(useDb(), { ...audit, actor: clientActor(row.clientId), action: 'token.issued', targetType: 'partner-client', targetId: row.id,
    detail: { partnerId: row.partnerId, scope: asked.join(' '), expiresIn: TOKEN_TTL_SECONDS } })
  return { access_token: token, token_type: 'Bearer', expires_in: TOKEN_TTL_SECONDS, scope: asked.join(' ') }
}

export interface PartnerToken { partnerId: string, clientId: string, scopes: PartnerScope[] }

const invalidToken = () => problem(401, 'invalid-token', 'The access token is missing, malformed, expired or not for this API.', { headers: { 'www-authenticate': 'Bearer realm="arcwise", error="invalid_token"' } })

/** A refused access token is audited when one was presented (a request with none is not). */
async function refuseToken(request: TokenRequest, reason: string, clientId?: string): Promise<never> {
  await recordAudit(useDb(), { ...request.audit, actor: clientActor(clientId), action: 'token.refused', targetType: 'access-token', detail: { reason, path: request.path.split('?')[0]!.slice(0, 200) } })
  throw invalidToken()
}

/** What a token check needs of its request: the Authorization header, and for the audit of a refusal who asked and the path. */
export interface TokenRequest { authorization: string | undefined, audit: AuditContext, path: string }

/** The partner of a request's access token holding `scope`: 401, or 403 for a missing scope. */
export async function verifyPartnerToken(request: TokenRequest, scope: PartnerScope): Promise<PartnerToken> {
  const header = request.authorization ?? ''
  if (!header) throw invalidToken()
  const match = /^Bearer (\S+)$/.exec(header)
  if (!match) return refuseToken(request, 'malformed-header')
  if (match[1]!.startsWith('awk_')) return refuseToken(request, 'lab-key')
  const key = await signingKey()
  let claims
  try {
    const { payload } = await jwtVerify(match[1]!, async (header) => {
      const [row] = await useDb().select().from(signingKeys).where(eq(signingKeys.kid, String(header.kid ?? '')))
      return importJWK((row?.publicJwk ?? key.publicJwk) as JWK, ALG)
    }, { issuer: issuer(), audience: AUDIENCE, typ: 'at+jwt', algorithms: [ALG] })
    claims = payload
  }
  catch { return refuseToken(request, 'invalid-or-expired') }
  const scopes = String(claims.scope ?? '').split(' ') as PartnerScope[]
  if (!scopes.includes(scope)) throw problem(403, 'insufficient-scope', `This token lacks the scope ${scope}.`)
  const client = await useDb().query.partnerClients.findFirst({ where: eq(partnerClients.clientId, String(claims.client_id)) })
  if (!client || client.revokedAt) return refuseToken(request, 'revoked-client', String(claims.client_id))
  await consumeRateLimit('partner', client.id)
  return { partnerId: client.partnerId, clientId: client.clientId, scopes }
}
