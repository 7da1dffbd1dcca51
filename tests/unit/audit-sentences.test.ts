import { describe, expect, it } from 'vitest'
import { auditSentence, type AuditEntryLike } from '../../shared/auditSentences'

const LAB = '11111111-1111-4111-8111-111111111111'
const PARTNER = '22222222-2222-4222-8222-222222222222'
const names = { [LAB]: 'Saltmarsh Stable Isotope Lab', [PARTNER]: 'Northgate Water Authority' }
const entry = (action: string, detail: Record<string, unknown> = {}, more: Partial<AuditEntryLike> = {}): AuditEntryLike =>
  ({ action, actorLabel: 'admin@arcwise.example', targetType: null, targetId: null, detail, ...more })

describe('audit entries read as sentences with names', () => {
  it.each([
    [entry('key.issued', { labId: LAB, name: 'lab PC', scopes: ['acquisitions:write', 'results:read'], prefix: 'abc' }, { targetType: 'api-key', targetId: 'k' }), null,
      'Morgan Ashdown issued the API key "lab PC" for Saltmarsh Stable Isotope Lab with acquisitions:write, results:read.'],
    [entry('grant.set', { labId: LAB, partnerId: PARTNER, eventTypes: ['result.created'] }), null,
      'Morgan Ashdown granted Northgate Water Authority Saltmarsh Stable Isotope Lab\'s results (result.created).'],
    [entry('user.role-changed', { from: { role: 'viewer', labId: null }, to: { role: 'lab_manager', labId: LAB } }, { targetType: 'user', targetId: 'u' }), 'Ines Varga',
      'Morgan Ashdown changed Ines Varga from viewer to lab manager of Saltmarsh Stable Isotope Lab.'],
    [entry('user.disabled', { email: 'x@example.org' }, { targetType: 'user', targetId: 'u' }), 'Priya Holm', 'Morgan Ashdown disabled the account of Priya Holm.'],
    [entry('delivery.replayed', { partnerId: PARTNER, count: 3, status: 'dead' }, { targetType: 'partner', targetId: PARTNER }), 'Northgate Water Authority',
      'Morgan Ashdown replayed 3 deliveries of Northgate Water Authority.'],
    [entry('instrument.geometry-versioned', { version: 2, validFrom: '2026-11-28T09:30:00.000Z' }, { targetType: 'instrument', targetId: 'i' }), 'Noble-gas sector',
      'Morgan Ashdown added geometry version 2 of Noble-gas sector, valid from 2026-11-28 09:30 UTC.'],
    [entry('schema.status-changed', { name: 'result-event', version: 1, status: 'deprecated', sunsetAt: '2027-03-01T00:00:00.000Z' }, { targetType: 'exchange-schema', targetId: 's' }), 'result-event v1',
      'Morgan Ashdown set the exchange schema result-event v1 to deprecated, sunset 2027-03-01 00:00 UTC.'],
    [entry('sign-in.failed', {}, { actorLabel: 'someone@example.org' }), null, 'A sign-in as someone@example.org failed: wrong e-mail or password.'],
    [entry('endpoint.disabled', { url: 'https://hooks.example.org/in', reason: 'the endpoint answered 410 Gone' }, { actorLabel: 'delivery worker' }), null,
      'The webhook endpoint https://hooks.example.org/in was disabled: the endpoint answered 410 Gone.'],
  ])('%#: %j', (e, target, sentence) => {
    expect(auditSentence(e, { actor: 'Morgan Ashdown', target, names })).toBe(sentence)
  })

  it('an action without its own sentence still names who and what, never a raw JSON detail', () => {
    const s = auditSentence(entry('result.released', { secret: '{"x":1}' }, { targetType: 'result', targetId: 'r-1' }), { actor: 'Ines Varga', target: 'run CO2-0042', names })
    expect(s).toBe('Ines Varga: result released, run CO2-0042.')
  })

  it('an id no longer resolvable is shown as recorded, not dropped', () => {
    const s = auditSentence(entry('key.revoked', { labId: 'gone' }, { targetType: 'api-key', targetId: 'k-9' }), { actor: 'Morgan Ashdown', target: null, names })
    expect(s).toBe('Morgan Ashdown revoked the API key api-key k-9 of gone.')
  })

  it('reads no name through the prototype chain', () => {
    const s = auditSentence(entry('grant.revoked', { labId: 'constructor', partnerId: '__proto__' }), { actor: 'A', target: null, names: {} })
    expect(s).toBe('A revoked __proto__\'s grant to constructor\'s results.')
  })
})
