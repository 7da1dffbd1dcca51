import { RateLimiterDrizzle, RateLimiterRes } from 'rate-limiter-flexible'
import { rateLimits } from '../../database/schema'

// Requests per API key (or partner client) per minute, counted in PostgreSQL so the limit
// holds across app instances.
//
// The requests of one key that arrive in the same turn of the event loop are counted
// together: one `penalty(key, n)` adds all n points in one statement, and the first of them
// that still fit under the limit pass, the rest get 429, as n separate `consume` calls would
// have decided. A lab system posting at full speed otherwise had every request wait its turn
// on the one counter row (bench:ingest).
let limiter: RateLimiterDrizzle | undefined

const countTogether = batchPerTurn<string, undefined>(async (keys) => {
  const perMinute = Number(useRuntimeConfig().rateLimit.perMinute)
  limiter ??= new RateLimiterDrizzle({ storeClient: useDb(), schema: rateLimits, keyPrefix: 'api', points: perMinute, duration: 60 })
  const res = await limiter.penalty(keys[0]!, keys.length)
  const room = Math.max(0, perMinute - (res.consumedPoints - keys.length))
  const seconds = Math.max(1, Math.ceil(res.msBeforeNext / 1000))
  return keys.map((_, i) => i < room
    ? { value: undefined }
    : { error: problem(429, 'rate-limited', `Too many requests for this key; retry in ${seconds} s.`, { headers: { 'retry-after': String(seconds) } }) })
}, key => key)

export function consumeRateLimit(kind: 'lab-key' | 'partner', id: string): Promise<undefined> {
  // 0 turns the limit off (a deployment behind its own gateway limits there).
  if (Number(useRuntimeConfig().rateLimit.perMinute) === 0) return Promise.resolve(undefined)
  return countTogether(`${kind}:${id}`)
}

// Limits counted per minute by one key, in the same table: a limiter per key prefix and
// allowance (a changed allowance gets a fresh limiter), refused with 429 and Retry-After.
const perMinuteLimiters = new Map<string, RateLimiterDrizzle>()

/** Counts one action under `keyPrefix` for `key`; 429 with Retry-After, and `message(seconds)`, past `perMinute`. */
export async function consumePerMinute(keyPrefix: string, key: string, perMinute: number, message: (seconds: number) => string): Promise<void> {
  const id = `${keyPrefix}:${perMinute}`
  let limiter = perMinuteLimiters.get(id)
  if (!limiter) perMinuteLimiters.set(id, limiter = new RateLimiterDrizzle({ storeClient: useDb(), schema: rateLimits, keyPrefix, points: perMinute, duration: 60 }))
  try { await limiter.consume(key) }
  catch (refusal) {
    if (!(refusal instanceof RateLimiterRes)) throw refusal
    const seconds = Math.max(1, Math.ceil(refusal.msBeforeNext / 1000))
    throw problem(429, 'rate-limited', message(seconds), { headers: { 'retry-after': String(seconds) } })
  }
}

// Test sends and replays make the hub send on a person's click: counted per partner per
// minute (webhooks.testSendsPerMinute, webhooks.replaysPerMinute), so a script cannot turn
// the hub into a request cannon aimed at a receiver.
const actionSettings = { 'test-send': 'testSendsPerMinute', 'replay': 'replaysPerMinute' } as const
const actionWords = { 'test-send': 'test sends', 'replay': 'replays' } as const

/** Counts one test send or replay for the partner; 429 with Retry-After past the minute's allowance. */
export async function consumePartnerAction(action: keyof typeof actionSettings, partnerId: string): Promise<void> {
  const perMinute = Number(useRuntimeConfig().webhooks[actionSettings[action]])
  if (perMinute === 0) return
  await consumePerMinute(`partner-${action}`, partnerId, perMinute, seconds => `At most ${perMinute} ${actionWords[action]} a minute per partner; retry in ${seconds} s.`)
}
