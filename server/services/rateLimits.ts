import { RateLimiterDrizzle, RateLimiterRes } from 'rate-limiter-flexible'
import { rateLimits } from '../database/schema'

// Requests per API key (or partner client) per minute, counted in PostgreSQL so the limit
// holds across app instances.
let limiter: RateLimiterDrizzle | undefined

export async function consumeRateLimit(kind: 'lab-key' | 'partner', id: string) {
  // 0 turns the limit off (a deployment behind its own gateway limits there).
  if (Number(useRuntimeConfig().rateLimit.perMinute) === 0) return
  limiter ??= new RateLimiterDrizzle({
    storeClient: useDb(), schema: rateLimits, keyPrefix: 'api', points: Number(useRuntimeConfig().rateLimit.perMinute), duration: 60,
  })
  try {
    await limiter.consume(`${kind}:${id}`)
  }
  catch (rejection) {
    if (!(rejection instanceof RateLimiterRes)) throw rejection
    const seconds = Math.max(1, Math.ceil(rejection.msBeforeNext / 1000))
    throw problem(429, 'rate-limited', `Too many requests for this key; retry in ${seconds} s.`, { headers: { 'retry-after': String(seconds) } })
  }
}
