import { mkdtempSync, rmSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { url } from '@nuxt/test-utils/e2e'
import { afterAll, describe, expect, it } from 'vitest'
import { startStoreFake, storeEnv, type StoreFake } from '../../scripts/lib/store-fake'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, useArcwise } from '../support/server'

// The object store going away and coming back (issue 23): this file's server writes to an
// s3rver of its own, which the test stops and starts again.
const PORT = 4575
const directory = mkdtempSync(join(tmpdir(), 'arcwise-store-down-'))
let fake: StoreFake | undefined = await startStoreFake({ port: PORT, directory })
afterAll(async () => { await fake?.close(); rmSync(directory, { recursive: true, force: true }) })

await useArcwise({ env: storeEnv(PORT) })

const post = (secret: string, body: unknown) => new ConsoleClient().request('POST', '/api/v1/acquisitions', body, bearer(secret))

describe('the object store down', () => {
  it('answers 503 with a problem document and stores nothing, says so in /readyz, and recovers when the store returns', async () => {
    const { key, lab, sql, admin } = await labWithInstrument()
    const kept = await post(key.secret, co2Acquisition())
    expect(kept.status).toBe(201)
    await fake!.close()
    fake = undefined
    const body = co2Acquisition()
    const refused = await post(key.secret, body)
    expect(refused.status).toBe(503)
    expect(refused.headers.get('content-type')).toContain('application/problem+json')
    expect(refused.headers.get('retry-after')).toBe('5')
    expect(refused.body).toMatchObject({ status: 503, type: 'urn:arcwise:problem:store-unavailable' })
    expect(refused.body.detail).toMatch(/Nothing was stored/)
    const [rows] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id} and external_id = ${body.runId}`
    expect(rows.n).toBe(0)
    const [all] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(all.n).toBe(1)
    const notReady = await fetch(url('/readyz'))
    expect(notReady.status).toBe(503)
    const doc = await notReady.json()
    expect(doc.type).toBe('urn:arcwise:problem:not-ready')
    expect(doc.detail).toMatch(/^store: /)
    expect(doc.detail).not.toMatch(/database/)

    // The console's acquisition page still shows the results, and says why the raw data is not.
    const detailPath = `/api/console/labs/${lab.id}/acquisitions/${kept.body.id}`
    const detail = await admin.get(detailPath)
    expect(detail.status).toBe(200)
    expect(detail.body.result.peaks.length).toBeGreaterThan(0)
    expect(detail.body.payload).toMatchObject({ unavailable: true, head: '' })
    const page = await fetch(url(`/console/labs/${lab.id}/acquisitions/${kept.body.id}`), { headers: { cookie: admin.cookie } })
    expect(page.status).toBe(200)
    const html = await page.text()
    expect(html).toContain('Raw data temporarily unavailable')
    expect(html).toContain(kept.body.runId)
    const spectrum = await admin.get(`${detailPath}/spectrum`)
    expect(spectrum.status).toBe(503)
    expect(spectrum.body.detail).toMatch(/raw data is temporarily unavailable/)

    fake = await startStoreFake({ port: PORT, directory })
    expect((await admin.get(detailPath)).body.payload.unavailable).toBe(false)
    const again = await post(key.secret, body)
    expect(again.status, JSON.stringify(again.body).slice(0, 300)).toBe(201)
    expect(again.body.runId).toBe(body.runId)
    const ready = await fetch(url('/readyz'))
    expect(ready.status).toBe(200)
    expect((await ready.json()).checks.store.ok).toBe(true)
  })
})
