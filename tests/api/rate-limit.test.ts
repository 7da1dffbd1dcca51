import { describe, expect, it } from 'vitest'
import { bearer, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, useArcwise, type ApiResponse } from '../support/server'

// A server of its own with a limit of 5 requests per key per minute.
await useArcwise({ env: { NUXT_RATE_LIMIT_PER_MINUTE: '5' } })

describe('rate limits per key', () => {
  it('answers 429 with Retry-After once a key spends its minute, counted in PostgreSQL', async () => {
    const { key } = await labWithInstrument()
    const statuses: number[] = []
    let last: ApiResponse | undefined
    for (let i = 0; i < 7; i++) {
      last = await new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, bearer(key.secret))
      statuses.push(last.status)
    }
    expect(statuses).toEqual([200, 200, 200, 200, 200, 429, 429])
    expect(Number(last!.headers.get('retry-after'))).toBeGreaterThan(0)
    expect(last!.body.type).toBe('urn:arcwise:problem:rate-limited')
    const [row] = await testDb()`select points from rate_limits where key = ${`api:lab-key:${key.id}`}`
    expect(row!.points).toBeGreaterThanOrEqual(7)
  })

  it('lets exactly the limit through when a burst arrives at once, however the requests are counted together', async () => {
    // The server counts a key's requests of one event-loop turn in one statement; the
    // answer must be the same as counting them one by one: 5 pass, the rest 429.
    const { key } = await labWithInstrument()
    const answers = await Promise.all(Array.from({ length: 12 }, () => new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, bearer(key.secret))))
    const statuses = answers.map(a => a.status).sort()
    expect(statuses).toEqual([...Array(5).fill(200), ...Array(7).fill(429)])
    for (const refused of answers.filter(a => a.status === 429)) expect(Number(refused.headers.get('retry-after'))).toBeGreaterThan(0)
    const [row] = await testDb()`select points from rate_limits where key = ${`api:lab-key:${key.id}`}`
    expect(row!.points).toBe(12)
  })
})
