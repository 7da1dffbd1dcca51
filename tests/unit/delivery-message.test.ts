import { describe, expect, it } from 'vitest'
import { Webhook } from 'standardwebhooks'
import { deliveryMessage, signedHeaders } from '../../server/services/delivery/message'

// Messages as Standard Webhooks defines them ({ type, timestamp, data }), signed
// `v1,` + base64(HMAC-SHA256(secret, "{id}.{timestamp}.{body}")); every signature is checked
// with the standardwebhooks package, not with the code that made it.

const secret = `whsec_${Buffer.from('arcwise-unit-test-secret-32-bytes').toString('base64')}`
const previous = `whsec_${Buffer.from('the-secret-before-the-rotation!!').toString('base64')}`
const payload = { id: 'a1', runId: 'run-7', instrument: 'ms-1', acquiredAt: '2026-12-01T10:00:00.000Z', sampleRef: 'S-1', status: 'processed', receivedAt: '2026-12-01T10:00:01.000Z', result: { peaks: [1, 2, 3] } }
const eventRow = {
  event_type: 'result.created', test_payload: null, payload_text: JSON.stringify(payload),
  sequence: 42, lab: 'north', event_at: '2026-12-01 10:00:01.123456+00', event_id: 'e-1',
}

describe('deliveryMessage', () => {
  it('is the whole event with its fields first, timestamped with the event\'s own time', () => {
    const m = deliveryMessage(eventRow, 256 * 1024, 'https://hub.example')
    expect(m.kind).toBe('event')
    const body = JSON.parse(m.body)
    expect(body).toEqual({ type: 'result.created', timestamp: '2026-12-01T10:00:01.123Z', data: { eventId: 'e-1', lab: 'north', sequence: 42, ...payload } })
    expect(Object.keys(body.data).slice(0, 3)).toEqual(['eventId', 'lab', 'sequence'])
    // The same on every retry: nothing in it depends on when it is built.
    expect(deliveryMessage(eventRow, 256 * 1024, 'https://hub.example').body).toBe(m.body)
  })

  it('is the thin form with the result\'s address when the whole would pass the size cap', () => {
    const m = deliveryMessage(eventRow, 100, 'https://hub.example')
    expect(m.kind).toBe('thin')
    const body = JSON.parse(m.body)
    expect(body.data).toEqual({
      eventId: 'e-1', lab: 'north', sequence: 42, thin: true, id: 'a1', runId: 'run-7', instrument: 'ms-1', acquiredAt: payload.acquiredAt,
      sampleRef: 'S-1', status: 'processed', receivedAt: payload.receivedAt, resultUrl: 'https://hub.example/api/v1/results/a1',
    })
    expect(body.data.result).toBeUndefined()
  })

  it('carries a test payload as it was given', () => {
    const m = deliveryMessage({ ...eventRow, event_type: 'webhook.test', payload_text: null, test_payload: { hello: 'there' }, event_id: null }, Infinity, 'https://hub.example')
    expect(m.kind).toBe('test')
    expect(JSON.parse(m.body)).toMatchObject({ type: 'webhook.test', data: { hello: 'there' } })
  })
})

describe('signedHeaders', () => {
  const body = deliveryMessage(eventRow, Infinity, 'https://hub.example').body
  const at = new Date()

  it('carries the Standard Webhooks headers, verified by the standardwebhooks package', () => {
    const headers = signedHeaders('msg_2Lh9', body, [secret], at)
    expect(headers['webhook-id']).toBe('msg_2Lh9')
    expect(headers['webhook-timestamp']).toBe(String(Math.floor(at.getTime() / 1000)))
    expect(headers['webhook-signature']).toBe(new Webhook(secret).sign('msg_2Lh9', at, body))
    expect(new Webhook(secret).verify(body, headers)).toEqual(JSON.parse(body))
  })

  it('signs a Buffer body as its text', () => {
    const headers = signedHeaders('msg_buf', Buffer.from(body), [secret], at)
    expect(() => new Webhook(secret).verify(body, headers)).not.toThrow()
  })

  it('signs with both secrets during a rotation, each verifiable on its own', () => {
    const headers = signedHeaders('msg_rot', body, [secret, previous], at)
    expect(headers['webhook-signature']!.split(' ')).toHaveLength(2)
    expect(() => new Webhook(secret).verify(body, headers)).not.toThrow()
    expect(() => new Webhook(previous).verify(body, headers)).not.toThrow()
  })

  it('does not verify with another secret, another body or another id', () => {
    const headers = signedHeaders('msg_x', body, [secret], at)
    const other = `whsec_${Buffer.from('someone-else-entirely-32-bytes!!').toString('base64')}`
    expect(() => new Webhook(other).verify(body, headers)).toThrow()
    expect(() => new Webhook(secret).verify(body.replace('north', 'south'), headers)).toThrow()
    expect(() => new Webhook(secret).verify(body, { ...headers, 'webhook-id': 'msg_y' })).toThrow()
  })
})
