import { z } from 'zod'

// The page's Content-Security-Policy (server/middleware/00.headers.ts) runs scripts only from
// the hub or with the page's nonce, and never eval.
//
// zod 4 probes `new Function("")` to decide whether to compile fast object parsers, the first
// time it builds an object schema; under the policy that probe is a reported violation. Set at
// module load, before any page or the API reference builds a schema (the setting is global,
// so every copy of zod in the bundle sees it).
z.config({ jitless: true })

// Scripts the app adds to the head after load (the API reference's colour-mode script) carry
// the nonce the server gave this page, as the server-rendered ones do.
export default defineNuxtPlugin(() => {
  const nonce = document.querySelector<HTMLScriptElement>('script[nonce]')?.nonce
  if (!nonce) return
  injectHead().hooks.hook('tags:resolve', ({ tags }) => {
    for (const tag of tags) if (tag.tag === 'script') tag.props.nonce = nonce
  })
})
