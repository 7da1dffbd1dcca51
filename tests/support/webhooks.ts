import { createServer } from 'node:http'
import { randomBytes } from 'node:crypto'
import { afterAll } from 'vitest'
import { parseSealingKeys, sealWith } from '../../server/utils/keyring'
import { testEnv } from './env'
import { labWithInstrument } from './lab'
import { testDb, unique } from './server'

/** Polls `probe` until it gives something truthy, which it returns; fails after `timeoutMs`. */
export async function until<T>(what: string, probe: () => Promise<T | undefined | false> | T | undefined | false, timeoutMs = 30_000): Promise<T> {
  const deadline = Date.now() + timeoutMs
  for (;;) {
    const value = await probe()
    if (value) return value
    if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`)
    await new Promise(r => setTimeout(r, 100))
  }
}

/**
 * A paused endpoint written straight into the database (for tests that need a delivery row to
 * find, not a send). Its secret is sealed under the test keyring like any other, so that
 * `npm run keys:rotate` (tests/api/secrets.test.ts) can open every stored value.
 */
export async function insertPausedEndpoint(partnerId: string, endpointUrl: string): Promise<string> {
  const env = testEnv().serverEnv
  const sealed = sealWith(parseSealingKeys(env.NUXT_SEALING_KEYS ?? '', env.NUXT_SESSION_PASSWORD), `whsec_${randomBytes(24).toString('base64')}`)
  const [row] = await testDb()<{ id: string }[]>`insert into webhook_endpoints (partner_id, url, event_types, status, sealed_secret) values (${partnerId}, ${endpointUrl}, ${['webhook.test']}, 'paused', ${sealed}) returning id`
  return row!.id
}

/** A new lab (instrument, key) that grants a new partner, and one endpoint of that partner at `endpointUrl`. */
export async function grantedPartnerWithEndpoint(endpointUrl: string, extra: Record<string, unknown> = {}) {
  const ctx = await labWithInstrument()
  const partner = (await ctx.admin.post('/api/console/partners', { slug: unique('p'), name: 'Sink Partner', kind: 'data_team', contactEmail: 'sink@example.org' })).body
  await ctx.admin.post(`/api/console/labs/${ctx.lab.id}/grants`, { partnerId: partner.id })
  const endpoint = await ctx.admin.post(`/api/console/partners/${partner.id}/endpoints`, { url: endpointUrl, ...extra })
  if (endpoint.status !== 201) throw new Error(`creating the endpoint answered ${endpoint.status}: ${JSON.stringify(endpoint.body)}`)
  return { ...ctx, partner, endpoint: endpoint.body }
}

export interface ReceivedMessage { path: string, headers: Record<string, string>, body: string }

/**
 * A receiver on 127.0.0.1:`port` that keeps what arrived, in order, and answers each request
 * with `answer(path, headers)` (200 unless told); closed after the file's tests.
 */
export async function recordingSink(port: number, answer: (path: string, headers: Record<string, string>) => number = () => 200): Promise<ReceivedMessage[]> {
  const received: ReceivedMessage[] = []
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      const message = { path: req.url!, headers: Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])), body: Buffer.concat(chunks).toString() }
      received.push(message)
      const status = answer(message.path, message.headers)
      res.writeHead(status).end(status === 410 ? 'gone' : 'ok')
    })
  })
  await new Promise<void>(resolve => sink.listen(port, '127.0.0.1', resolve))
  afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))
  return received
}
