import { RateLimiterDrizzle } from 'rate-limiter-flexible'
import { rateLimits } from '../database/schema'

// Requests per API key (or partner client) per minute, counted in PostgreSQL so the limit
// holds across app instances.
//
// The requests of one key that arrive in the same turn of the event loop are counted
// together: one `penalty(key, n)` adds all n points in one statement, and the first of them
// that still fit under the limit pass, the rest get 429, as n separate `consume` calls would
// have decided. A lab system posting at full speed otherwise had every request wait its turn
// on the one counter row (bench:ingest).
let limiter: RateLimiterDrizzle | undefined

interface Waiting { resolve: () => void, reject: (error: unknown) => void }
const waiting = new Map<string, Waiting[]>()

export function consumeRateLimit(kind: 'lab-key' | 'partner', id: string): Promise<void> {
  // 0 turns the limit off (a deployment behind its own gateway limits there).
  if (Number(useRuntimeConfig().rateLimit.perMinute) === 0) return Promise.resolve()
  const key = `${kind}:${id}`
  return new Promise((resolve, reject) => {
    let group = waiting.get(key)
    if (!group) {
      waiting.set(key, group = [])
      setImmediate(() => void count(key))
    }
    group.push({ resolve, reject })
  })
}

async function count(key: string) {
  const group = waiting.get(key)!
  waiting.delete(key)
  const perMinute = Number(useRuntimeConfig().rateLimit.perMinute)
  limiter ??= new RateLimiterDrizzle({ storeClient: useDb(), schema: rateLimits, keyPrefix: 'api', points: perMinute, duration: 60 })
  try {
    const res = await limiter.penalty(key, group.length)
    const room = Math.max(0, perMinute - (res.consumedPoints - group.length))
    const seconds = Math.max(1, Math.ceil(res.msBeforeNext / 1000))
    group.forEach((w, i) => i < room
      ? w.resolve()
      : w.reject(problem(429, 'rate-limited', `Too many requests for this key; retry in ${seconds} s.`, { headers: { 'retry-after': String(seconds) } })))
  }
  catch (error) {
    for (const w of group) w.reject(error)
  }
}
