// The demo's webhook endpoints: one per demo partner, pointing at the demo receiver, made
// through the console API as the demo admin would make them. Their secrets go to the demo
// keys file, where the receiver reads them to verify signatures.
import { writeFileSync } from 'node:fs'
import { demoPartners, demoUsers } from './demo'
import { demoKeysFile, readDemoKeys } from './seed'

export async function createDemoEndpoints(appUrl: string, receiverUrl: string): Promise<number> {
  const admin = demoUsers.find(u => u.role === 'admin')!
  const signIn = await fetch(`${appUrl}/api/console/session`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email: admin.email, password: admin.password }) })
  if (!signIn.ok) throw new Error(`demo admin sign-in answered ${signIn.status}`)
  const cookie = signIn.headers.getSetCookie().find(c => c.startsWith('nuxt-session='))!.split(';')[0]!
  const { items } = await (await fetch(`${appUrl}/api/console/partners`, { headers: { cookie } })).json() as { items: { id: string, slug: string }[] }
  const keys = readDemoKeys()
  let made = 0
  for (const p of demoPartners) {
    const partner = items.find(i => i.slug === p.slug)
    if (!partner) continue
    const res = await fetch(`${appUrl}/api/console/partners/${partner.id}/endpoints`, {
      method: 'POST', headers: { 'content-type': 'application/json', cookie },
      body: JSON.stringify({ url: `${receiverUrl}/hooks/${p.slug}`, description: `${p.name}: demo receiver on this machine` }),
    })
    if (res.status !== 201) throw new Error(`creating the demo endpoint of ${p.slug} answered ${res.status}: ${await res.text()}`)
    keys[`webhook:${p.slug}`] = (await res.json() as { secret: string }).secret
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
