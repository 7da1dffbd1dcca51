// Pages Nuxt renders: the request's CSP nonce (server/middleware/00.headers.ts) goes on the
// scripts Nuxt writes into a page's head and around its body (entry module, payload, runtime
// config), and the renderer's `x-powered-by: Nuxt` goes. The app's own markup (`html.body`)
// is left alone: it carries user text, and no script of ours is there.
export default defineNitroPlugin((nitroApp) => {
  nitroApp.hooks.hook('render:html', (html, { event }) => {
    const nonce = event.context.cspNonce as string | undefined
    if (!nonce) return
    const withNonce = (chunk: string) => chunk.replaceAll('<script', `<script nonce="${nonce}"`)
    html.head = html.head.map(withNonce)
    html.bodyPrepend = html.bodyPrepend.map(withNonce)
    html.bodyAppend = html.bodyAppend.map(withNonce)
  })
  nitroApp.hooks.hook('render:response', (response) => {
    if (response.headers) delete response.headers['x-powered-by']
  })
})
