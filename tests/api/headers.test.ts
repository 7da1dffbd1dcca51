import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { useArcwise } from '../support/server'

// No NUXT_TRUSTED_PROXIES here: the hub is reached directly over plain HTTP.
await useArcwise()

const get = (path: string, headers: Record<string, string> = {}) => fetch(url(path), { headers, redirect: 'manual' })

describe('security headers', () => {
  it.each([
    ['the sign-in page', '/sign-in'],
    ['a console page (signed out: a redirect)', '/console/labs'],
    ['the API reference', '/docs'],
    ['an API route', '/api/health'],
    ['a refused API call', '/api/console/me'],
    ['an unknown API path', '/api/v1/nothing-here'],
  ])('%s cannot be framed, sniffed or leak its address, and names no framework', async (_what, path) => {
    const res = await get(path)
    const csp = res.headers.get('content-security-policy') ?? ''
    expect(csp).toContain('frame-ancestors \'none\'')
    expect(csp).toContain('object-src \'none\'')
    expect(csp).toMatch(/script-src 'self' 'nonce-[\w+/=]{20,}'/)
    expect(csp).not.toContain('unsafe-eval')
    expect(res.headers.get('x-frame-options')).toBe('DENY')
    expect(res.headers.get('x-content-type-options')).toBe('nosniff')
    expect(res.headers.get('referrer-policy')).toBe('same-origin')
    expect(res.headers.get('x-powered-by')).toBeNull()
    // Plain HTTP: no HSTS, no upgrade of sub-requests.
    expect(res.headers.get('strict-transport-security')).toBeNull()
    expect(csp).not.toContain('upgrade-insecure-requests')
  })

  it('every script a page ships carries the nonce of its own answer, and the nonce changes per answer', async () => {
    const nonces: string[] = []
    for (const path of ['/sign-in', '/docs']) {
      const res = await get(path)
      const nonce = /'nonce-([^']+)'/.exec(res.headers.get('content-security-policy') ?? '')![1]!
      nonces.push(nonce)
      const html = await res.text()
      const scripts = html.match(/<script\b[^>]*>/g) ?? []
      expect(scripts.length).toBeGreaterThan(0)
      for (const tag of scripts) expect(tag).toContain(`nonce="${nonce}"`)
    }
    expect(nonces[0]).not.toBe(nonces[1])
  })

  it('a client cannot switch HSTS on by claiming HTTPS when no proxy is trusted', async () => {
    const res = await get('/api/health', { 'x-forwarded-proto': 'https' })
    expect(res.headers.get('strict-transport-security')).toBeNull()
  })
})
