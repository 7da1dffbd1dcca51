// What recorded attempts say about their endpoints' circuits. Pure (tests/unit/delivery-health.test.ts,
// which is why it names only the fields it reads of send.ts's `Sent`); record.ts writes it.

/** The fields of a sent attempt (send.ts, `Sent`) that tell its endpoint's health. */
export interface SentAttempt {
  row: { endpoint_id: string, attempts: number, replay_requested: boolean }
  outcome: { class: string, statusCode: number | null, retryAfterS: number | null }
}

/** The longest an endpoint waits for a Retry-After (a day, as a delivery's wait is capped in retry.ts). */
const MAX_ENDPOINT_WAIT_S = 86_400
// A 429 without Retry-After still slows the endpoint down (common practice, no source).
const THROTTLED_WAIT_S = 1

/**
 * What a group of attempts says about each endpoint: whether one succeeded, how many failed
 * on a message's first try (or a replay's, asked for by a person) and how many on a retry (a
 * 429 asks the sender to slow down and counts as neither), and how long the endpoint asked to
 * be left alone (Retry-After on any answer, or 1 s for a bare 429).
 *
 * Only the first kind counts towards opening the circuit of an endpoint that is not ordered.
 * A retry is a message that failed before, so its failing again says as much about the message
 * as about the endpoint: an endpoint that refuses some messages and takes the others had the
 * retries of its refused ones come due together, fail together and open the circuit, which
 * then probed with such retries only and was disabled for want of a success, while it took
 * every message tried for the first time (`npm run chaos`, 2026-12-03, the "flaky" endpoint;
 * tests/api/delivery-circuit.test.ts). A first try is the endpoint's own evidence: when it is
 * down, the first tries of its new messages fail and open the circuit.
 */
export function endpointHealth(sent: SentAttempt[]) {
  const by = new Map<string, { id: string, ok: boolean, failures: number, retry_failures: number, wait: number | null }>()
  for (const { row, outcome } of sent) {
    const h = by.get(row.endpoint_id) ?? { id: row.endpoint_id, ok: false, failures: 0, retry_failures: 0, wait: null }
    by.set(row.endpoint_id, h)
    const throttled = outcome.statusCode === 429
    if (outcome.class === 'success') h.ok = true
    else if (!throttled && outcome.class !== 'guard-refused') {
      if (row.attempts === 0 || row.replay_requested) h.failures++
      else h.retry_failures++
    }
    const wait = outcome.retryAfterS ?? (throttled ? THROTTLED_WAIT_S : null)
    if (wait !== null && outcome.class !== 'success') h.wait = Math.min(MAX_ENDPOINT_WAIT_S, Math.max(h.wait ?? 0, wait))
  }
  return [...by.values()]
}

/**
 * Why the worker disabled an endpoint that has had no success for `afterMs`, in the unit an
 * operator would set it in: "72 hours" by default, "72 seconds" in a soak (rounding to whole
 * hours once said "0 hours").
 */
export function noSuccessReason(afterMs: number) {
  const [amount, unit] = afterMs >= 3600_000 ? [afterMs / 3600_000, 'hours'] : afterMs >= 60_000 ? [afterMs / 60_000, 'minutes'] : [afterMs / 1000, 'seconds']
  return `no delivery succeeded for ${Number(amount.toFixed(1))} ${unit}`
}
