import { createPage, url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { afterAll, describe, expect, it } from 'vitest'
import { postAcquisition } from '../../scripts/lib/lab-system'
import { demoUser } from '../support/demo'
import { co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

await useArcwise({ browser: true })

// Issue 21, point 10: what a first visit moves over the network, measured by Chromium's own
// count of bytes received (headers and encoded bodies, CDP Network.loadingFinished), each page
// in a fresh browser context so nothing comes from a cache.

interface Transfer { path: string, bytes: number, requests: number, files: { url: string, bytes: number, encoding: string, mime: string }[] }

async function firstVisit(path: string, cookie?: string): Promise<Transfer & { page: Page }> {
  const page = await createPage()
  if (cookie) {
    const at = cookie.indexOf('=')
    await page.context().addCookies([{ name: cookie.slice(0, at), value: cookie.slice(at + 1), url: url('/') }])
  }
  const cdp = await page.context().newCDPSession(page)
  await cdp.send('Network.enable')
  await cdp.send('Network.setCacheDisabled', { cacheDisabled: true })
  const seen = new Map<string, { url: string, bytes: number, encoding: string, mime: string }>()
  cdp.on('Network.responseReceived', (e) => {
    const headers = Object.fromEntries(Object.entries(e.response.headers).map(([k, v]) => [k.toLowerCase(), String(v)]))
    seen.set(e.requestId, { url: e.response.url, bytes: 0, encoding: headers['content-encoding'] ?? '', mime: e.response.mimeType })
  })
  cdp.on('Network.loadingFinished', (e) => {
    const file = seen.get(e.requestId)
    if (file) file.bytes = e.encodedDataLength
  })
  await page.goto(url(path), { waitUntil: 'networkidle' })
  await page.waitForFunction(() => (window as unknown as { useNuxtApp?: () => { isHydrating: boolean } }).useNuxtApp?.().isHydrating === false)
  // Prefetches that a hydrated page starts when idle (links in view) count too.
  await page.waitForTimeout(1500)
  await page.waitForLoadState('networkidle')
  const files = [...seen.values()]
  return { page, path, files, requests: files.length, bytes: files.reduce((s, f) => s + f.bytes, 0) }
}

const kb = (n: number) => `${(n / 1024).toFixed(1)} KB`
const measured: Transfer[] = []
afterAll(() => {
  // Printed for the record (the lead quotes these in the closing note).
  console.log(['First-visit transfer sizes (Chromium, cold cache):', ...measured.map(m => `  ${m.path.padEnd(70)} ${kb(m.bytes).padStart(10)}  ${m.requests} requests`)].join('\n'))
})

describe('bytes a first visit moves', () => {
  let signInScripts: Set<string>
  let consoleScripts = new Set<string>()

  it('/sign-in transfers under 500 KB, its scripts and styles compressed', async () => {
    const visit = await firstVisit('/sign-in')
    measured.push(visit)
    signInScripts = new Set(visit.files.filter(f => f.mime.includes('javascript')).map(f => f.url))
    const assets = visit.files.filter(f => new URL(f.url).pathname.startsWith('/_nuxt/') && /\.(?:js|css)$/.test(new URL(f.url).pathname))
    expect(assets.length).toBeGreaterThan(0)
    // Nitro leaves files under 1 KB as they are (compressing them gains nothing): anything
    // bigger arrives encoded. 2 KB on the wire is above 1 KB of body plus its headers.
    expect(assets.filter(f => f.bytes > 2048 && !['br', 'gzip'].includes(f.encoding)).map(f => f.url)).toEqual([])
    expect(assets.some(f => ['br', 'gzip'].includes(f.encoding))).toBe(true)
    expect(visit.bytes).toBeLessThan(500 * 1024)
  })

  it('every console page transfers under 1 MB on a first visit', async () => {
    const { lab, instrument, key } = await labWithInstrument()
    const body = co2Acquisition()
    const posted = await postAcquisition(url('/').replace(/\/$/, ''), key.secret, body, body.runId)
    expect(posted.status).toBe(201)
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const [demoLab] = await testDb()`select l.id as lab, i.id as instrument from labs l join instruments i on i.lab_id = l.id where i.slug = 'irms-north'`
    const [partner] = await testDb()`select id from partners where slug = 'northgate-water'`
    const paths = [
      '/console', '/console/labs', `/console/labs/${demoLab!.lab}`, `/console/labs/${demoLab!.lab}/instruments`,
      `/console/labs/${demoLab!.lab}/instruments/${demoLab!.instrument}`, `/console/labs/${lab.id}/instruments/${instrument.id}`,
      `/console/labs/${lab.id}/acquisitions`, `/console/labs/${lab.id}/acquisitions/${posted.body.id}`,
      `/console/labs/${demoLab!.lab}/keys`, `/console/labs/${demoLab!.lab}/access`, `/console/labs/${demoLab!.lab}/sequences`,
      `/console/labs/${demoLab!.lab}/control-charts`, `/console/labs/${demoLab!.lab}/methods`,
      '/console/partners', `/console/partners/${partner!.id}`, `/console/partners/${partner!.id}/webhooks`, `/console/partners/${partner!.id}/deliveries`,
      `/console/partners/${partner!.id}/clients`, `/console/partners/${partner!.id}/signature-check`,
      '/console/reference-materials', '/console/schemas', '/console/users', '/console/audit',
    ]
    for (const path of paths) {
      const visit = await firstVisit(path, admin.cookie)
      expect(new URL(visit.page.url()).pathname, `${path} opened signed in`).toBe(path)
      await visit.page.close()
      measured.push(visit)
      for (const f of visit.files) if (f.mime.includes('javascript')) consoleScripts.add(f.url)
    }
    const heaviest = measured.filter(m => m.path.startsWith('/console')).sort((a, b) => b.bytes - a.bytes)[0]!
    console.log(`heaviest console page: ${heaviest.path} ${kb(heaviest.bytes)}`)
    expect(heaviest.bytes).toBeLessThan(1024 * 1024)
  })

  it('the API reference bundle loads on /docs and nowhere else', async () => {
    const visit = await firstVisit('/docs')
    await expect.poll(() => visit.page.locator('body').textContent(), { timeout: 30_000 }).toContain('Post an acquisition')
    measured.push(visit)
    const decoded = await visit.page.evaluate(() => (performance.getEntriesByType('resource') as PerformanceResourceTiming[]).map(e => ({ url: e.name, size: e.decodedBodySize })))
    const docsOnly = decoded.filter(d => d.url.endsWith('.js') && !signInScripts.has(d.url) && !consoleScripts.has(d.url))
    // The reference itself is megabytes of script, fetched by /docs alone.
    expect(Math.max(0, ...docsOnly.map(d => d.size))).toBeGreaterThan(1024 * 1024)
    consoleScripts = new Set()
  })
})
