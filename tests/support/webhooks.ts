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
