import { Webhook } from 'standardwebhooks'
import { describe, expect, it } from 'vitest'
import { checkRecordedSignature, stopReason, type StopFacts } from '../../server/services/delivery/verdicts'

// Issue 21, point 2: why a delivery stopped, in one sentence from what is recorded, and the
// check of a recorded signature against the endpoint's secret (the standardwebhooks package
// signs here, as a second opinion on the HMAC).

const settings = { schedule: [5, 30, 120], circuitFailures: 20 }
const now = new Date('2026-12-03T12:00:00Z')
const base: StopFacts = {
  status: 'dead', eventId: 'ev', attempts: 4, nextAttemptAt: now, finishedAt: now,
  last: { class: 'http-error', statusCode: 500, error: null },
  endpoint: { status: 'active', disabledReason: null, blockedUntil: null, consecutiveFailures: 0 },
}

describe('why a delivery stopped', () => {
  it.each<[string, Partial<StopFacts>, RegExp | null]>([
    ['delivered', { status: 'succeeded' }, null],
    ['the schedule spent', {}, /retry schedule was spent after 4 attempts; the last answered HTTP 500/],
    ['410 Gone', { attempts: 1, last: { class: 'http-error', statusCode: 410, error: null }, endpoint: { ...base.endpoint, status: 'disabled', disabledReason: 'the receiver answered 410 Gone' } }, /410 Gone, which disables the endpoint/],
    ['a refused address', { attempts: 1, last: { class: 'guard-refused', statusCode: null, error: 'loopback address 127.0.0.1' } }, /refused by the outbound guard \(loopback address 127.0.0.1\)/],
    ['the endpoint disabled', { attempts: 2, endpoint: { ...base.endpoint, status: 'disabled', disabledReason: 'no delivery succeeded for 72 hours' } }, /endpoint was disabled \(no delivery succeeded for 72 hours\)/],
    ['disabled, then resumed', { attempts: 2 }, /Stopped after 2 of 4 attempts: the endpoint was disabled then/],
    ['a test message', { eventId: null, attempts: 1 }, /test message is sent once and never retried: the receiver answered HTTP 500/],
    ['the circuit open', { status: 'pending', attempts: 2, endpoint: { ...base.endpoint, blockedUntil: new Date('2026-12-03T12:00:30Z'), consecutiveFailures: 25 } }, /circuit is open after 25 messages in a row failed on first try; one probe is sent at 2026-12-03 12:00:30 UTC/],
    ['Retry-After', { status: 'pending', attempts: 1, endpoint: { ...base.endpoint, blockedUntil: new Date('2026-12-03T12:05:00Z'), consecutiveFailures: 1 } }, /asked Arcwise to wait until 2026-12-03 12:05:00 UTC \(Retry-After\)/],
    ['a replay waiting for a disabled endpoint', { status: 'pending', attempts: 1, endpoint: { ...base.endpoint, status: 'disabled', disabledReason: 'the receiver answered 410 Gone' } }, /Waiting: the endpoint is disabled \(the receiver answered 410 Gone\); it is sent once the endpoint is resumed/],
    ['paused', { status: 'pending', attempts: 0, endpoint: { ...base.endpoint, status: 'paused' } }, /endpoint is paused/],
    ['retrying', { status: 'pending', attempts: 2, nextAttemptAt: new Date('2026-12-03T12:02:00Z') }, /Retrying: attempt 3 of at most 4 at 2026-12-03 12:02:00 UTC/],
  ])('%s', (_name, change, expected) => {
    const sentence = stopReason({ ...base, ...change }, settings, now)
    if (expected === null) expect(sentence).toBeNull()
    else expect(sentence).toMatch(expected)
  })
})

describe('a recorded signature checked against the endpoint\'s secret', () => {
  const current = `whsec_${Buffer.from('c'.repeat(32)).toString('base64')}`
  const previous = `whsec_${Buffer.from('p'.repeat(32)).toString('base64')}`
  const body = '{"type":"result.released","data":{"id":"a"}}'
  const at = new Date('2026-12-03T11:59:00Z')
  const headersSignedWith = (...secrets: string[]) => {
    const id = 'msg_1'
    const signatures = secrets.map(s => new Webhook(s).sign(id, at, body))
    return { 'webhook-id': id, 'webhook-timestamp': String(Math.floor(at.getTime() / 1000)), 'webhook-signature': signatures.join(' ') }
  }

  it.each<[string, Record<string, string>, { current: string, previous: string | null }, string]>([
    ['signed with the current secret', headersSignedWith(current), { current, previous: null }, 'current'],
    ['signed by both during a rotation', headersSignedWith(previous, current), { current, previous }, 'current'],
    ['signed before a rotation, still in the overlap', headersSignedWith(previous), { current, previous }, 'previous'],
    ['signed before a rotation, the overlap over', headersSignedWith(previous), { current, previous: null }, 'none'],
    ['no signature header', { 'webhook-id': 'msg_1', 'webhook-timestamp': '1' }, { current, previous: null }, 'unsigned'],
  ])('%s', (_name, headers, secrets, verdict) => {
    expect(checkRecordedSignature(headers, body, secrets)).toBe(verdict)
  })

  it('a body changed by one byte does not verify', () => {
    expect(checkRecordedSignature(headersSignedWith(current), body.replace('"a"', '"b"'), { current, previous: null })).toBe('none')
  })
})
