import { randomBytes } from 'node:crypto'

// Security headers on every answer: pages, /docs (the Scalar API reference), API routes and
// errors (this middleware runs first, so a refusal by a later one carries them too).
// Scripts run only from the hub itself or with this request's nonce (server/plugins/pageSecurity.ts
// puts it on the scripts Nuxt writes into the page); styles allow inline because Vue style
// bindings and the API reference set style attributes at run time. Nothing may frame the hub.
export default defineEventHandler((event) => {
  const nonce = randomBytes(16).toString('base64')
  event.context.cspNonce = nonce
  const https = requestIsHttps(event)
  const policy = [
    `default-src 'self'`,
    `script-src 'self' 'nonce-${nonce}'`,
    `script-src-attr 'none'`,
    `style-src 'self' 'unsafe-inline'`,
    `img-src 'self' data: blob:`,
    `font-src 'self' data:`,
    `connect-src 'self'`,
    `worker-src 'self' blob:`,
    `object-src 'none'`,
    `base-uri 'none'`,
    `form-action 'self'`,
    `frame-ancestors 'none'`,
    ...(https ? ['upgrade-insecure-requests'] : []),
  ].join('; ')
  setResponseHeaders(event, {
    'content-security-policy': policy,
    'x-frame-options': 'DENY',
    'x-content-type-options': 'nosniff',
    // Same-origin, not no-referrer: with no-referrer browsers send `Origin: null` on the
    // console's own POSTs, which the origin check refuses. Reset and invitation paths never
    // leave for another site either way.
    'referrer-policy': 'same-origin',
    'cross-origin-opener-policy': 'same-origin',
  })
  // HSTS only means something over HTTPS (RFC 6797 §7.2: not sent over plain HTTP).
  if (https) setResponseHeader(event, 'strict-transport-security', 'max-age=31536000; includeSubDomains')
})
