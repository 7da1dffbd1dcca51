import { describe, expect, it } from 'vitest'
import { monthBounds, monthOf, monthOfPartition, partitionName } from '../../server/services/partitions/maintenance'

// Months of the partitioned tables are UTC calendar months (server/services/partitions).
describe('partition months', () => {
  it.each([
    ['2026-12-03T17:00:00Z', 0, '2026-12'],
    ['2026-12-31T23:59:59.999Z', 1, '2027-01'],
    ['2026-01-15T00:00:00Z', -1, '2025-12'],
    ['2026-03-31T22:30:00-05:00', 0, '2026-04'],
    ['2024-02-29T12:00:00Z', 12, '2025-02'],
  ])('%s with offset %i is %s', (at, offset, month) => {
    expect(monthOf(new Date(at), offset)).toBe(month)
  })

  it.each([
    ['2026-12', '2026-12-01 00:00:00+00', '2027-01-01 00:00:00+00'],
    ['2024-02', '2024-02-01 00:00:00+00', '2024-03-01 00:00:00+00'],
  ])('%s runs from %s to %s', (month, from, to) => {
    expect(monthBounds(month)).toEqual({ from, to })
  })

  it('reads a month from a partition name and nothing from any other name', () => {
    expect(partitionName('delivery_attempts', '2026-04')).toBe('delivery_attempts_2026_04')
    expect(monthOfPartition('delivery_attempts', 'delivery_attempts_2026_04')).toBe('2026-04')
    expect(monthOfPartition('deliveries', 'deliveries_default')).toBe('default')
    // A delivery_attempts partition is not one of deliveries' months.
    expect(monthOfPartition('deliveries', 'delivery_attempts_2026_04')).toBeNull()
    expect(monthOfPartition('deliveries', 'deliveries_2026_4')).toBeNull()
    expect(monthOfPartition('deliveries', 'deliveries_old')).toBeNull()
  })
})
