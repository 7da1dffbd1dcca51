import { describe, expect, it } from 'vitest'
import { exchangeSchemaList } from '../../shared/schemas/responses'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

await useArcwise()

describe('exchange schemas', () => {
  it('serves each version as JSON Schema 2020-12 that describes the acquisition body', async () => {
    const list = await new ConsoleClient().get('/api/v1/schemas')
    exchangeSchemaList.parse(list.body)
    expect(list.body.items.map((s: any) => `${s.name}/${s.version}`)).toEqual(expect.arrayContaining(['acquisition/1', 'result-event/1']))
    const res = await new ConsoleClient().get('/api/v1/schemas/acquisition/1')
    expect(res.headers.get('content-type')).toContain('application/schema+json')
    expect(res.body.$schema).toBe('https://json-schema.org/draft/2020-12/schema')
    expect(res.body.required).toEqual(expect.arrayContaining(['instrument', 'runId', 'acquiredAt']))
    expect(Object.keys(res.body.properties)).toEqual(expect.arrayContaining(['settings', 'sweep', 'detectors', 'mzSpectrum', 'processing']))
    expect(res.body.additionalProperties).toBe(false)
    expect((await new ConsoleClient().get('/api/v1/schemas/acquisition/9')).status).toBe(404)
  })

  it('a deprecated version answers with Deprecation and Sunset headers, counts who uses it, and a retired one is refused', async () => {
    const { admin, key, lab } = await labWithInstrument()
    const [schema] = await testDb()`select id from exchange_schemas where name = 'acquisition' and version = 1`
    const sunset = '2027-06-30T00:00:00.000Z'
    try {
      const noSunset = await admin.patch(`/api/console/schemas/${schema!.id}`, { status: 'deprecated' })
      expect(noSunset.status).toBe(422)
      expect(noSunset.body.errors[0].path).toBe('sunsetAt')
      expect((await admin.patch(`/api/console/schemas/${schema!.id}`, { status: 'deprecated', sunsetAt: sunset })).status).toBe(200)
      const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(key.secret))
      expect(res.status).toBe(201)
      expect(res.headers.get('deprecation')).toMatch(/^@\d+$/)
      expect(res.headers.get('sunset')).toBe(new Date(sunset).toUTCString())
      const usage = await admin.get('/api/console/schemas')
      const entry = usage.body.items.find((s: any) => s.id === schema!.id)
      expect(entry.usedBy.map((u: any) => u.lab)).toContain(lab.slug)

      await admin.patch(`/api/console/schemas/${schema!.id}`, { status: 'retired' })
      const refused = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(key.secret))
      expect(refused.status).toBe(400)
      expect(refused.body.type).toBe('urn:arcwise:problem:schema-retired')
    }
    finally {
      await admin.patch(`/api/console/schemas/${schema!.id}`, { status: 'current' })
    }
  })

  it('only admins change a schema\'s status', async () => {
    const { sql } = await labWithInstrument()
    const [schema] = await sql`select id from exchange_schemas limit 1`
    const viewer = await new ConsoleClient().signIn('viewer@arcwise.example', 'demo-viewer-passphrase')
    expect((await viewer.patch(`/api/console/schemas/${schema!.id}`, { status: 'retired' })).status).toBe(403)
    expect((await viewer.get('/api/console/schemas')).status).toBe(200)
  })
})
