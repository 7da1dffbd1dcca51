import type { CertificateFonts } from './pdf'

// The certificate's fonts ship with the app as Nitro server assets (server/assets/fonts, see
// its README): read once per process.

let loaded: Promise<CertificateFonts> | undefined

async function asset(name: string): Promise<Buffer> {
  const raw = await useStorage('assets:server').getItemRaw(`fonts:${name}`)
  if (!raw) throw new Error(`font ${name} is missing from the server assets`)
  return Buffer.from(raw as Uint8Array)
}

export function certificateFonts(): Promise<CertificateFonts> {
  loaded ??= (async () => ({
    regular: [await asset('inter-latin-400-normal.woff'), await asset('inter-greek-400-normal.woff'), await asset('DejaVuSans.ttf')],
    bold: [await asset('inter-latin-600-normal.woff'), await asset('inter-greek-600-normal.woff'), await asset('DejaVuSans.ttf')],
  }))().catch((error) => { loaded = undefined; throw error })
  return loaded
}
