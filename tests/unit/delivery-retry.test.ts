import { describe, expect, it } from 'vitest'
import { nextDelaySeconds, parseRetrySchedule, retryAfterSeconds } from '../../server/services/delivery/retry'

// Retry-After (RFC 9110 §10.2.3): delay-seconds or an HTTP-date; the retry schedule with
// ±10 % jitter, and Retry-After honoured when it asks for longer (capped at a day).

describe('retryAfterSeconds', () => {
  const now = Date.parse('2026-12-03T08:00:00Z')

  it.each([
    ['120', 120],
    [' 7 ', 7],
    ['0', 0],
  ])('reads delay-seconds %j as %d', (value, seconds) => {
    expect(retryAfterSeconds(value, now)).toBe(seconds)
  })

  it.each([
    ['Thu, 03 Dec 2026 08:01:30 GMT', 90], // IMF-fixdate
    ['Thursday, 03-Dec-26 08:00:10 GMT', 10], // obsolete RFC 850 form
    ['Thu Dec  3 08:05:00 2026', 300], // asctime form, read as UTC by RFC 9110 §5.6.7
  ])('reads the HTTP date %j as %d seconds from now', (value, seconds) => {
    const read = retryAfterSeconds(value, now)
    // asctime carries no zone: Date.parse reads it as local time, so only the UTC runs compare exactly.
    if (value.endsWith('GMT') || new Date().getTimezoneOffset() === 0) expect(read).toBe(seconds)
    else expect(read).not.toBeNull()
  })

  it('reads a date in the past as no wait', () => {
    expect(retryAfterSeconds('Thu, 03 Dec 2026 07:00:00 GMT', now)).toBe(0)
  })

  it.each([undefined, '', 'soon', 'in a minute'])('has nothing to say for %j', (value) => {
    expect(retryAfterSeconds(value, now)).toBeNull()
  })
})

describe('nextDelaySeconds', () => {
  const schedule = [10, 60, 600]

  it('takes the schedule entry of the attempt, jittered by at most 10 % either way', () => {
    expect(nextDelaySeconds(1, null, schedule, () => 0)).toBeCloseTo(9)
    expect(nextDelaySeconds(1, null, schedule, () => 0.5)).toBeCloseTo(10)
    expect(nextDelaySeconds(2, null, schedule, () => 0.999999)).toBeCloseTo(66, 3)
    expect(nextDelaySeconds(3, null, schedule, () => 0.25)).toBeCloseTo(570)
  })

  it('spreads many retries over the whole ±10 % band', () => {
    let seed = 1
    const random = () => ((seed = (seed * 16807) % 2147483647) / 2147483647)
    const delays = Array.from({ length: 2000 }, () => nextDelaySeconds(2, null, schedule, random)!)
    expect(Math.min(...delays)).toBeGreaterThanOrEqual(54)
    expect(Math.max(...delays)).toBeLessThanOrEqual(66)
    expect(Math.min(...delays)).toBeLessThan(55)
    expect(Math.max(...delays)).toBeGreaterThan(65)
  })

  it('gives up when the schedule is spent', () => {
    expect(nextDelaySeconds(4, null, schedule, () => 0.5)).toBeNull()
    expect(nextDelaySeconds(1, 30, [], () => 0.5)).toBeNull()
  })

  it('waits as long as Retry-After asks when that is later, at most a day', () => {
    expect(nextDelaySeconds(1, 3600, schedule, () => 0.5)).toBe(3600)
    expect(nextDelaySeconds(1, 5, schedule, () => 0.5)).toBeCloseTo(10)
    expect(nextDelaySeconds(1, 10 * 86_400, schedule, () => 0.5)).toBe(86_400)
  })
})

describe('the retry schedule setting', () => {
  const fallback = [5, 300]
  it.each([
    ['', fallback], [undefined, fallback], [' , ', fallback], ['x', fallback],
    ['1,1,1', [1, 1, 1]], [' 2, 3 ', [2, 3]], ['0', [0]], ['4,-1,6', [4, 6]],
  ] as const)('%j reads as %j (an empty setting is the default, not one immediate retry)', (text, expected) => {
    expect(parseRetrySchedule(text, fallback)).toEqual(expected)
  })
})
