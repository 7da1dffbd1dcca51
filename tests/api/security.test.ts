// OWASP API Security Top 10 (2023), API1–API5, for lab keys and partner tokens.
import { describe, expect, it } from 'vitest'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise()

describe('OWASP API Security Top 10 (2023)', () => {
  it('API1/API3: no answer to a lab key carries a key hash, a secret, or another tenant\'s id', async () => {
    const mine = await labWithInstrument()
    const other = await labWithInstrument()
    const [{ secret_hash: hash }] = await mine.sql<[{ secret_hash: string }]>`select secret_hash from api_keys where id = ${mine.key.id}`
    const posted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(mine.key.secret))
    const otherPosted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(other.key.secret))
    const answers = [posted.body]
    for (const path of ['/api/v1/acquisitions', `/api/v1/acquisitions/${posted.body.id}`, `/api/v1/acquisitions/${posted.body.id}/result`, `/api/v1/acquisitions/${otherPosted.body.id}`]) {
      answers.push((await new ConsoleClient().request('GET', path, undefined, bearer(mine.key.secret))).body)
    }
    const text = JSON.stringify(answers)
    for (const forbidden of [hash, mine.key.secret, other.lab.id, other.key.id]) expect(text).not.toContain(forbidden)
    // Another lab's acquisition is 404; its id appears only as the path the caller asked for.
    expect(answers[4]).toMatchObject({ status: 404, instance: `/api/v1/acquisitions/${otherPosted.body.id}` })
    expect(JSON.stringify(answers.slice(0, 4))).not.toContain(otherPosted.body.id)
    // The lab's own id is not needed by a lab system either: answers name the instrument by slug.
    expect(text).not.toContain(mine.lab.id)
  })

  it('API3: a body that tries to set labId, status or versions is refused and stores nothing', async () => {
    const { key, lab, sql } = await labWithInstrument()
    for (const extra of [{ labId: lab.id }, { status: 'processed' }, { versions: { geometry: 9 } }, { result: {} }]) {
      const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', { ...co2Acquisition(), ...extra }, bearer(key.secret))
      expect(res.status).toBe(422)
    }
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(0)
  })

  it('API5: a key\'s scopes bound what it may call', async () => {
    const { admin, lab } = await labWithInstrument()
    const writer = (await admin.post(`/api/console/labs/${lab.id}/keys`, { name: 'writer', scopes: ['acquisitions:write'] })).body
    expect((await new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, bearer(writer.secret))).status).toBe(403)
    expect((await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(writer.secret))).status).toBe(201)
  })

  it('API2: console sessions do not open the v1 API, and lab keys do not open the console', async () => {
    const { admin, key } = await labWithInstrument()
    expect((await admin.get('/api/v1/acquisitions')).status).toBe(401)
    expect((await new ConsoleClient().request('GET', '/api/console/me', undefined, bearer(key.secret))).status).toBe(401)
  })
})
