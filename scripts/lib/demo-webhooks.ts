// The demo's webhook endpoints: one per demo partner, pointing at the demo receiver (and one
// retired receiver of Northgate's that answers 410), made
// through the console API as the demo admin would make them. Their secrets go to the demo
// keys file, where the receiver reads them to verify signatures.
import { writeFileSync } from 'node:fs'
import { demoAdmin } from './console-client'
import { demoPartners } from './demo'
import { demoKeysFile, readDemoKeys } from './seed'

export async function createDemoEndpoints(appUrl: string, receiverUrl: string): Promise<number> {
  const admin = await demoAdmin(appUrl)
  const keys = readDemoKeys()
  let made = 0
  for (const p of demoPartners) {
    const partner = await admin.partner(p.slug).catch(() => null)
    if (!partner) continue
    const res = await admin.call<{ secret: string }>('POST', `/api/console/partners/${partner.id}/endpoints`, { url: `${receiverUrl}/hooks/${p.slug}`, description: `${p.name}: demo receiver on this machine` })
    if (res.status !== 201) throw new Error(`creating the demo endpoint of ${p.slug} answered ${res.status}: ${JSON.stringify(res.body)}`)
    keys[`webhook:${p.slug}`] = res.body.secret
    made++
  }
  // Northgate also kept its old archive's endpoint, whose receiver now answers 410 Gone: the
  // first result sent there disables it, so the homes and the bell have something to show.
  const northgate = await admin.partner('northgate-water').catch(() => null)
  if (northgate) {
    const res = await admin.call('POST', `/api/console/partners/${northgate.id}/endpoints`, { url: `${receiverUrl}/retired/northgate-water`, description: 'Northgate archive (retired receiver: answers 410 Gone)' })
    if (res.status !== 201) throw new Error(`creating the retired demo endpoint answered ${res.status}: ${JSON.stringify(res.body)}`)
    made++
  }
  writeFileSync(demoKeysFile, JSON.stringify(keys, null, 2), { mode: 0o600 })
  return made
}

/** The secrets the receiver verifies a partner's messages with. */
export function demoEndpointSecrets(partner: string): string[] {
  const secret = readDemoKeys()[`webhook:${partner}`]
  return secret ? [secret] : []
}
