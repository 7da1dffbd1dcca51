import { createServer } from 'node:http'
import { afterAll } from 'vitest'
import { labWithInstrument } from './lab'
import { unique } from './server'

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
 * A receiver on 127.0.0.1:`port` that answers 200 to everything and keeps what arrived, in
 * order; closed after the file's tests.
 */
export async function recordingSink(port: number): Promise<ReceivedMessage[]> {
  const received: ReceivedMessage[] = []
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      received.push({ path: req.url!, headers: Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])), body: Buffer.concat(chunks).toString() })
      res.writeHead(200).end('ok')
    })
  })
  await new Promise<void>(resolve => sink.listen(port, '127.0.0.1', resolve))
  afterAll(() => new Promise<void>(resolve => sink.close(() => resolve())))
  return received
}
