// When to try a delivery again. Pure (tests/unit/delivery-retry.test.ts).

/** Retry-After as seconds, from delta-seconds or an HTTP date (RFC 9110 §10.2.3). */
export function retryAfterSeconds(value: string | undefined, now = Date.now()): number | null {
  if (!value) return null
  if (/^\d+$/.test(value.trim())) return Number(value.trim())
  const at = Date.parse(value)
  return Number.isNaN(at) ? null : Math.max(0, Math.round((at - now) / 1000))
}

/**
 * When to try again after the `attempts`-th failure, or null when the schedule is spent.
 * Up to ±10 % jitter spreads retries of many deliveries; Retry-After is honoured when later.
 */
export function nextDelaySeconds(attempts: number, retryAfterS: number | null, schedule: readonly number[], random = Math.random): number | null {
  const base = schedule[attempts - 1]
  if (base === undefined) return null
  const jittered = base * (0.9 + 0.2 * random())
  return Math.max(jittered, Math.min(retryAfterS ?? 0, 86_400))
}


/**
 * The retry schedule from its setting (seconds, comma-separated), or `fallback` when it names
 * none. An empty setting once read as [0] (Number('') is 0): one immediate retry, then dead.
 */
export function parseRetrySchedule(text: unknown, fallback: readonly number[]): readonly number[] {
  const steps = String(text ?? '').split(',').map(s => s.trim()).filter(s => s !== '').map(Number).filter(n => Number.isFinite(n) && n >= 0)
  return steps.length ? steps : fallback
}
