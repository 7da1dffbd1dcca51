import { url } from '@nuxt/test-utils/e2e'
import fc from 'fast-check'
import { describe, expect, it } from 'vitest'
import { badRequests, rowCounts, rowsWritten, sendBadRequest, type BadRequest, type FuzzOutcome } from '../../scripts/lib/fuzz'
import { demoUser } from '../support/demo'
import { labWithInstrument } from '../support/lab'
import { useArcwise } from '../support/server'

// The short version of `npm run chaos`'s fuzz phase: a few hundred generated bad requests
// (scripts/lib/fuzz.ts) against the ingest and console routes, prototype keys, malformed
// credentials and backtracking bait in text fields among them. No delivery worker and no
// rate limiter run here, so any row that appears was written by a refused request. (The
// requests built to exhaust a process, and the event-loop and memory figures, are chaos's.)
await useArcwise({ env: { NUXT_PROCESS_ROLE: 'web', NUXT_RATE_LIMIT_PER_MINUTE: '0' } })

describe('generated bad requests', () => {
  it('each gets a 4xx problem document that names no prototype function, and none writes a row', async () => {
    const { admin, lab, instrument, key, sql } = await labWithInstrument()
    const [partner] = await sql`select id from partners where slug = 'northgate-water'`
    const [viewer] = await sql`select id from users where email = ${demoUser('viewer').email}`
    const target = { labId: lab.id, instrumentSlug: instrument.slug, labKey: key.secret, partnerId: partner!.id, userId: viewer!.id, cookie: admin.cookie, allowedHosts: [] }
    const base = url('/').replace(/\/$/, '')
    await fetch(url('/.well-known/jwks.json')) // the token signing key, made on first use, exists before the count
    const before = await rowCounts(sql)
    const wrong: ({ request: BadRequest } & FuzzOutcome)[] = []
    await fc.assert(fc.asyncProperty(badRequests(target), async (request) => {
      const outcome = await sendBadRequest(base, request)
      if (outcome.status < 400 || outcome.status >= 500 || !outcome.problem || outcome.leak) wrong.push({ request, ...outcome })
    }), { numRuns: 400, seed: 20261202 })
    expect(wrong.map(w => `${w.status || w.error} ${w.problem ? 'problem' : 'not a problem'}${w.leak ? ', names a prototype function' : ''}: ${w.request.why} ${w.request.method} ${w.request.path} ${w.request.body?.slice(0, 120) ?? ''}`)).toEqual([])
    expect(rowsWritten(before, await rowCounts(sql))).toEqual({})
  })
})
