import { describe, expect, it } from 'vitest'
import { batchPerTurn, type Outcome } from '../../server/utils/turnBatch'

// Grouped calls: what is called in one turn of the event loop reaches `run` as one list,
// and each caller gets its own outcome.

const nextTurn = () => new Promise(resolve => setImmediate(resolve))

describe('batchPerTurn', () => {
  it('hands the calls of one turn to run together, in order, and each caller its own answer', async () => {
    const runs: number[][] = []
    const double = batchPerTurn<number, number>(async (items) => {
      runs.push(items)
      return items.map(n => ({ value: n * 2 }))
    })
    const answers = await Promise.all([double(1), double(2), double(3)])
    expect(answers).toEqual([2, 4, 6])
    expect(runs).toEqual([[1, 2, 3]])
  })

  it('runs the calls of a later turn apart', async () => {
    const runs: string[][] = []
    const echo = batchPerTurn<string, string>(async (items) => {
      runs.push(items)
      return items.map(value => ({ value }))
    })
    const first = echo('a')
    await nextTurn()
    const second = echo('b')
    expect(await Promise.all([first, second])).toEqual(['a', 'b'])
    expect(runs).toEqual([['a'], ['b']])
  })

  it('groups by key: one run per key within a turn', async () => {
    const runs: string[][] = []
    const grouped = batchPerTurn<string, string>(async (items) => {
      runs.push(items)
      return items.map(value => ({ value: value.toUpperCase() }))
    }, item => item[0]!)
    expect(await Promise.all([grouped('a1'), grouped('b1'), grouped('a2')])).toEqual(['A1', 'B1', 'A2'])
    expect(runs.map(r => r.join(',')).sort()).toEqual(['a1,a2', 'b1'])
  })

  it('fails only the caller whose outcome is an error', async () => {
    const maybe = batchPerTurn<number, number>(async items => items.map((n): Outcome<number> => n < 0 ? { error: new Error(`negative ${n}`) } : { value: n }))
    const results = await Promise.allSettled([maybe(1), maybe(-2), maybe(3)])
    expect(results.map(r => r.status)).toEqual(['fulfilled', 'rejected', 'fulfilled'])
    expect((results[1] as PromiseRejectedResult).reason.message).toBe('negative -2')
  })

  it('fails every caller of the group when run itself fails, and a caller run gave no outcome', async () => {
    const broken = batchPerTurn<number, number>(async () => { throw new Error('down') })
    const all = await Promise.allSettled([broken(1), broken(2)])
    expect(all.map(r => r.status === 'rejected' && (r.reason as Error).message)).toEqual(['down', 'down'])
    const short = batchPerTurn<number, number>(async items => items.slice(1).map(value => ({ value })))
    const some = await Promise.allSettled([short(1), short(2)])
    expect(some[0]).toMatchObject({ status: 'fulfilled', value: 2 })
    expect(some[1]).toMatchObject({ status: 'rejected' })
  })
})
