import { describe, expect, it } from 'vitest'
import { appliesTo, instrumentTimeline } from '../../app/utils/instrumentTimeline'

const now = new Date('2026-12-03T12:00:00Z')
const iso = (d: Date) => d.toISOString().slice(0, 10)

describe('an instrument\'s history on one timeline', () => {
  it('orders by validity, not version: a version valid from a later date sits above the one in force', () => {
    const t = instrumentTimeline([
      { id: 'g1', version: 1, validFrom: '2026-01-01T00:00:00Z' },
      { id: 'g2', version: 2, validFrom: '2027-01-01T00:00:00Z' },
    ], [], now)
    expect(t.map(e => [e.id, e.inForce, e.future])).toEqual([['g2', false, true], ['g1', true, false]])
    expect(appliesTo(t[1]!, iso)).toBe('Converts readings to m/z for acquisitions acquired from 2026-01-01 until 2027-01-01.')
    expect(appliesTo(t[0]!, iso)).toBe('Converts readings to m/z for acquisitions acquired from 2027-01-01 on.')
  })

  it('a version registered later but valid from an earlier day takes its place by validity', () => {
    const t = instrumentTimeline([
      { id: 'g1', version: 1, validFrom: '2026-06-01T00:00:00Z' },
      { id: 'g2', version: 2, validFrom: '2026-01-01T00:00:00Z' },
    ], [], now)
    expect(t.map(e => e.id)).toEqual(['g1', 'g2'])
    expect(t[0]!.inForce).toBe(true)
    expect(t[1]!.validUntil?.toISOString()).toBe('2026-06-01T00:00:00.000Z')
  })

  it('interleaves calibrations, marks the one in force, and never a retired one', () => {
    const t = instrumentTimeline(
      [{ id: 'g1', version: 1, validFrom: '2026-01-01T00:00:00Z' }, { id: 'g2', version: 2, validFrom: '2026-11-28T00:00:00Z' }],
      [
        { id: 'c1', version: 1, validFrom: '2026-11-01T00:00:00Z', geometryVersion: 1, retired: true },
        { id: 'c2', version: 2, validFrom: '2026-11-29T00:00:00Z', geometryVersion: 2 },
      ], now)
    expect(t.map(e => `${e.id}${e.inForce ? '*' : ''}`)).toEqual(['c2*', 'g2*', 'c1', 'g1'])
    expect(appliesTo(t[0]!, iso)).toBe('Corrects m/z (with geometry v2) for acquisitions acquired from 2026-11-29 on.')
    expect(appliesTo(t[2]!, iso)).toContain('no longer in force')
  })

  it('nothing is in force before the first version is valid', () => {
    const t = instrumentTimeline([{ id: 'g1', version: 1, validFrom: '2027-01-01T00:00:00Z' }], [], now)
    expect(t[0]!.inForce).toBe(false)
  })
})
