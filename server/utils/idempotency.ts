import type { H3Event } from 'h3'
import { and, eq, sql } from 'drizzle-orm'
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
    if (stored.state === 'in-flight' && !(await takeOverAbandoned(apiKeyId, key, stored.createdAt))) {
      throw problem(409, 'idempotency-key-in-flight', 'A request with this Idempotency-Key is being processed; retry later.')
    }
    if (stored.state === 'done') {
      setResponseStatus(event, stored.responseStatus ?? 200)
      setResponseHeader(event, 'idempotent-replayed', 'true')
      return stored.responseBody as T
    }
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

/**
 * A key left in flight longer than any request takes belongs to a process that died (or lost
 * PostgreSQL) mid-request: without this the lab's retries would get 409 for ever. One retry
 * takes it over; the run id's uniqueness still stops a second acquisition if the first
 * request did finish after all. `npm run chaos` found the stuck key by killing a process.
 */
const IN_FLIGHT_TTL_MS = 30_000

async function takeOverAbandoned(apiKeyId: string, key: string, since: Date): Promise<boolean> {
  if (Date.now() - since.getTime() < IN_FLIGHT_TTL_MS) return false
  // Compared in PostgreSQL (microseconds), and only one of several retries at once wins.
  const taken = await useDb().update(idempotencyKeys).set({ createdAt: sql`now()` })
    .where(and(eq(idempotencyKeys.apiKeyId, apiKeyId), eq(idempotencyKeys.key, key), eq(idempotencyKeys.state, 'in-flight'),
      sql`${idempotencyKeys.createdAt} < now() - make_interval(secs => ${IN_FLIGHT_TTL_MS / 1000})`))
    .returning({ key: idempotencyKeys.key })
  return taken.length === 1
}
