import { describe, expect, it } from 'vitest'
import { claimList, freshKeys } from '../../server/services/store/claimPlan'

// Claims of one turn's acquisitions in one statement (server/services/store/claimPlan.ts).
const raw = (c: string) => ({ key: `raw/${c.repeat(64)}`, bytes: 100 })
const arrays = (c: string) => ({ key: `arrays/${c.repeat(64)}`, bytes: 80 })

describe('claiming a turn\'s object keys together', () => {
  it('sends each key once, in key order, whatever order and how often the acquisitions name it', () => {
    const list = claimList([[raw('b'), arrays('b')], [raw('a'), arrays('a')], [raw('b'), arrays('b')]])
    expect(list.map(o => o.key)).toEqual([arrays('a').key, arrays('b').key, raw('a').key, raw('b').key])
    expect(new Set(list.map(o => o.key)).size).toBe(list.length)
  })

  it('gives an inserted key to the first acquisition that named it only; a key found claimed to none', () => {
    const requests = [[raw('a'), arrays('a')], [raw('a'), arrays('a')], [raw('c'), arrays('a')]]
    const fresh = freshKeys(requests, [raw('a').key, arrays('a').key, raw('c').key])
    expect(fresh.map(s => [...s].sort())).toEqual([[arrays('a').key, raw('a').key], [], [raw('c').key]])
    expect(freshKeys([[raw('a')]], []).map(s => s.size)).toEqual([0])
  })
})
