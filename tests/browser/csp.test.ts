import { createPage, url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs } from '../support/browser'
import { useArcwise } from '../support/server'

await useArcwise({ browser: true })

/** A page that records every Content-Security-Policy violation and every console error mentioning one. */
async function watchedPage(): Promise<{ page: Page, violations: () => Promise<string[]> }> {
  const page = await createPage()
  const logged: string[] = []
  page.on('console', (m) => { if (/Content.Security.Policy|Refused to/i.test(m.text())) logged.push(m.text()) })
  // Added through the DevTools protocol, so the policy under test does not block the watcher itself.
  await page.addInitScript(() => {
    const seen: string[] = []
    ;(window as unknown as { cspViolations: string[] }).cspViolations = seen
    document.addEventListener('securitypolicyviolation', e => seen.push(`${e.violatedDirective} ${e.blockedURI}`))
  })
  return { page, violations: async () => [...logged, ...await page.evaluate(() => (window as unknown as { cspViolations: string[] }).cspViolations)] }
}

describe('the Content-Security-Policy in a real browser', () => {
  it('the console signs in and shows its pages with no policy violation', async () => {
    const { page, violations } = await watchedPage()
    await page.goto(url('/sign-in'))
    await signInAs(page, 'admin')
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBeTruthy()
    for (const [link, heading] of [['Labs', 'Labs'], ['Users and invitations', 'Users and invitations']] as const) {
      await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: link }).click()
      await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe(heading)
    }
    await expectAccessible(page)
    await shot(page, 'csp-console')
    expect(await violations()).toEqual([])
  })

  it('the API reference at /docs renders its operations with no policy violation', async () => {
    const { page, violations } = await watchedPage()
    await page.goto(url('/docs'))
    await expect.poll(() => page.locator('body').textContent(), { timeout: 30_000 }).toContain('Post an acquisition')
    await shot(page, 'csp-docs')
    expect(await violations()).toEqual([])
  })

  it('an inline script slipped into a page does not run', async () => {
    const { page, violations } = await watchedPage()
    await page.goto(url('/sign-in'))
    await page.waitForLoadState('networkidle')
    // What an injected <script> would be: added by the page's own DOM, without the nonce.
    await page.evaluate(() => {
      const s = document.createElement('script')
      s.textContent = 'window.injectedRan = true'
      document.body.append(s)
    })
    await page.waitForTimeout(200)
    expect(await page.evaluate(() => (window as unknown as { injectedRan?: boolean }).injectedRan)).toBeUndefined()
    expect((await violations()).some(v => v.includes('script-src'))).toBe(true)
  })
})
