import { describe, expect, it } from 'vitest'
import { endpointHealth, noSuccessReason, type SentAttempt } from '../../server/services/delivery/health'

// What a group of recorded attempts says about each endpoint's circuit (record.ts). Only a
// message's first try (or a replay) counts towards opening it: a retry failed before, so its
// failing again is no news about the endpoint (the chaos run's "flaky", 2026-12-03).

type Outcome = SentAttempt['outcome']
const attempt = (endpoint: string, attempts: number, outcome: Partial<Outcome>, replay = false): SentAttempt => ({
  row: { endpoint_id: endpoint, attempts, replay_requested: replay },
  outcome: { class: 'server-error', statusCode: 500, retryAfterS: null, ...outcome },
})
const ok: Partial<Outcome> = { class: 'success', statusCode: 200 }

describe('endpointHealth', () => {
  it.each([
    ['first tries failing count', [attempt('e', 0, {}), attempt('e', 0, {})], { ok: false, failures: 2, retry_failures: 0, wait: null }],
    ['retries failing are counted apart', [attempt('e', 1, {}), attempt('e', 2, {}), attempt('e', 0, {})], { ok: false, failures: 1, retry_failures: 2, wait: null }],
    ['a replay is a first try again', [attempt('e', 8, {}, true)], { ok: false, failures: 1, retry_failures: 0, wait: null }],
    ['one success marks the group ok', [attempt('e', 1, {}), attempt('e', 0, ok)], { ok: true, failures: 0, retry_failures: 1, wait: null }],
    ['a 429 counts as neither and asks for a second', [attempt('e', 0, { statusCode: 429 })], { ok: false, failures: 0, retry_failures: 0, wait: 1 }],
    ['Retry-After on a failure is kept, the longest', [attempt('e', 0, { statusCode: 503, retryAfterS: 7 }), attempt('e', 1, { statusCode: 503, retryAfterS: 3 })], { ok: false, failures: 1, retry_failures: 1, wait: 7 }],
    ['a refusal of the guard counts as neither', [attempt('e', 0, { class: 'guard-refused', statusCode: null })], { ok: false, failures: 0, retry_failures: 0, wait: null }],
  ] as const)('%s', (_name, sent, expected) => {
    expect(endpointHealth([...sent])).toEqual([{ id: 'e', ...expected }])
  })

  it('keeps endpoints apart', () => {
    const health = endpointHealth([attempt('a', 0, {}), attempt('b', 3, {}), attempt('b', 0, ok)])
    expect(health).toEqual([
      { id: 'a', ok: false, failures: 1, retry_failures: 0, wait: null },
      { id: 'b', ok: true, failures: 0, retry_failures: 1, wait: null },
    ])
  })
})

describe('noSuccessReason', () => {
  it.each([
    [72 * 3600_000, 'no delivery succeeded for 72 hours'],
    [0.02 * 3600_000, 'no delivery succeeded for 1.2 minutes'],
    [30_000, 'no delivery succeeded for 30 seconds'],
    [90 * 60_000, 'no delivery succeeded for 1.5 hours'],
  ])('%d ms reads "%s"', (ms, reason) => expect(noSuccessReason(ms)).toBe(reason))
})
