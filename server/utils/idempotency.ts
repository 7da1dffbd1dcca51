import type { H3Event } from 'h3'
import { and, eq } from 'drizzle-orm'
import { idempotencyKeys } from '../database/schema'

// Idempotency-Key (IETF draft-ietf-httpapi-idempotency-key-header): the same key with the
// same body replays the stored answer; with another body, 422; while the first request is
// still running, 409. Keys are scoped to the API key that sent them.

export function getIdempotencyKey(event: H3Event): string | undefined {
  const raw = getRequestHeader(event, 'idempotency-key')
  if (raw === undefined) return undefined
  const key = raw.trim().replace(/^"(.*)"$/, '$1')
  if (!key || key.length > 255) throw fieldProblem('Idempotency-Key', 'must be 1 to 255 characters', 400, 'bad-idempotency-key')
  return key
}

export async function withIdempotency<T>(event: H3Event, apiKeyId: string, key: string | undefined, requestHash: string, run: () => Promise<{ status: number, body: T }>): Promise<T> {
  if (!key) {
    const { status, body } = await run()
    setResponseStatus(event, status)
    return body
  }
  const db = useDb()
  const [claimed] = await db.insert(idempotencyKeys).values({ apiKeyId, key, requestHash, state: 'in-flight' })
    .onConflictDoNothing().returning()
  if (!claimed) {
    const stored = await db.query.idempotencyKeys.findFirst({ where: and(eq(idempotencyKeys.apiKeyId, apiKeyId), eq(idempotencyKeys.key, key)) })
    if (!stored) throw problem(409, 'idempotency-key-in-flight', 'A request with this Idempotency-Key is being processed; retry later.')
    if (stored.requestHash !== requestHash) throw fieldProblem('Idempotency-Key', 'was used before with a different request body', 422, 'idempotency-key-reused')
    if (stored.state === 'in-flight') throw problem(409, 'idempotency-key-in-flight', 'A request with this Idempotency-Key is being processed; retry later.')
    setResponseStatus(event, stored.responseStatus ?? 200)
    setResponseHeader(event, 'idempotent-replayed', 'true')
    return stored.responseBody as T
  }
  try {
    const { status, body } = await run()
    await db.update(idempotencyKeys).set({ state: 'done', responseStatus: status, responseBody: body as unknown as Record<string, unknown> })
      .where(and(eq(idempotencyKeys.apiKeyId, apiKeyId), eq(idempotencyKeys.key, key)))
    setResponseStatus(event, status)
    return body
  }
  catch (error) {
    // A refused request stored nothing; the key is free for a corrected retry.
    await db.delete(idempotencyKeys).where(and(eq(idempotencyKeys.apiKeyId, apiKeyId), eq(idempotencyKeys.key, key)))
    throw error
  }
}
