// The server's sealing keyring (server/utils/keyring.ts): NUXT_SEALING_KEYS, and the session
// password's key for values sealed before the keyring existed.
let ring: { source: string, keyring: SealingKeyring } | undefined
let warned = false

function serverKeyring(): SealingKeyring {
  const config = useRuntimeConfig()
  const keys = String(config.sealingKeys ?? '')
  // Before the keyring, NUXT_SEALING_SECRET (when set) or the session password sealed (v1).
  const password = String(process.env.NUXT_SEALING_SECRET || config.session?.password || process.env.NUXT_SESSION_PASSWORD || '')
  const source = `${keys}\n${password}`
  if (ring?.source !== source) ring = { source, keyring: parseSealingKeys(keys, password) }
  if (!ring.keyring.keys.length && !warned) {
    warned = true
    useLog().warn('NUXT_SEALING_KEYS is not set: secrets are sealed under the session password\'s key; set a keyring and run npm run keys:rotate')
  }
  return ring.keyring
}

export function seal(plain: string): string {
  return sealWith(serverKeyring(), plain)
}

export function unseal(sealed: string): string {
  return unsealWith(serverKeyring(), sealed)
}
