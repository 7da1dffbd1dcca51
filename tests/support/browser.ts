import { mkdirSync, readFileSync } from 'node:fs'
import { createRequire } from 'node:module'
import { join } from 'node:path'
import { createPage } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { expect } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { demoUser } from './demo'
import { rootDir } from './env'

const shotsDir = join(rootDir, 'test-results', 'browser')
mkdirSync(shotsDir, { recursive: true })

/** Saves a full-page screenshot as a test artifact under test-results/browser/. */
export async function shot(page: Page, name: string) {
  await page.screenshot({ path: join(shotsDir, `${name}.png`), fullPage: true })
}

// axe-core is evaluated through the DevTools protocol, not added as a <script>: the hub's
// Content-Security-Policy refuses inline scripts, as it should for any script a page did not ship.
const axeSource = readFileSync(createRequire(import.meta.url).resolve('axe-core/axe.min.js'), 'utf8')

// Uncaught errors in the page, from sign-in on: a broken chart or handler throws here
// while the page can still look fine to a text check.
const pageErrors = new WeakMap<Page, string[]>()
export function watchPageErrors(page: Page) {
  if (pageErrors.has(page)) return
  const seen: string[] = []
  pageErrors.set(page, seen)
  page.on('pageerror', error => seen.push(error.message))
}

/** Runs axe-core on the page and fails on serious or critical violations, or on any page error seen so far. */
export async function expectAccessible(page: Page) {
  expect(pageErrors.get(page) ?? []).toEqual([])
  await page.evaluate(axeSource)
  const violations = await page.evaluate(async () => {
    const result = await (window as unknown as { axe: { run: () => Promise<{ violations: { id: string, impact: string, nodes: { target: string[] }[] }[] }> } }).axe.run()
    return result.violations.filter(v => v.impact === 'serious' || v.impact === 'critical').map(v => `${v.id}: ${v.nodes.map(n => n.target.join(' ')).join(', ')}`)
  })
  expect(violations).toEqual([])
}

export async function signInThroughForm(page: Page, email: string, password: string) {
  watchPageErrors(page)
  await page.getByLabel('E-mail').fill(email)
  await page.getByLabel('Password').fill(password)
  await page.getByRole('button', { name: 'Sign in' }).click()
  await page.waitForURL(/\/console/)
}

/** Signs in through the form as the seeded demo user of a role. */
export async function signInAs(page: Page, role: Role) {
  const user = demoUser(role)
  await signInThroughForm(page, user.email, user.password)
}

/** A new page, signed in through the form as the demo user of `role`. */
export async function signedInPage(role: Role) {
  const page = await createPage('/sign-in')
  await signInAs(page, role)
  return page
}

/**
 * Walks the menu to a lab's page as a person would: Labs, then the lab. It waits for the
 * Labs page itself, since the overview it leaves links to labs too.
 */
export async function openLabFromMenu(page: Page, labName: string) {
  await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Labs' }).click()
  await page.waitForURL(/\/console\/labs$/)
  await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe('Labs')
  await page.getByRole('main').getByRole('link', { name: labName, exact: true }).click()
  await page.waitForURL(/\/console\/labs\/[0-9a-f-]{36}$/)
}

/** Reloads the page and waits until Vue has hydrated it (clicks before that go unheard). */
export async function reloadHydrated(page: Page) {
  await page.reload()
  await page.waitForFunction(() => (window as unknown as { useNuxtApp?: () => { isHydrating: boolean } }).useNuxtApp?.().isHydrating === false)
}

/**
 * Elements reaching past the right edge of a phone-width page, named for the failure message.
 * Inside a scrolling container only absolutely or fixed placed ones count: they escape it when
 * it is not positioned (a table's sr-only header once widened the acquisition page to 480 px).
 */
const widerThanScreen = `(() => {
  const w = document.documentElement.clientWidth
  return [...document.querySelectorAll('body *')].filter(e => e.getBoundingClientRect().right > w + 1)
    .filter(e => !e.closest('.overflow-x-auto, .overflow-auto, .overflow-hidden') || ['absolute', 'fixed'].includes(getComputedStyle(e).position))
    .slice(0, 8).map(e => e.tagName.toLowerCase() + '.' + String(e.className).slice(0, 60) + ' ' + Math.round(e.getBoundingClientRect().right))
})()`

/** Nothing wider than a 390 px phone screen: no sideways scrolling to read a card. */
export async function expectFitsPhone(page: Page) {
  await expect.poll(() => page.evaluate(() => document.documentElement.scrollWidth), { message: await page.evaluate(widerThanScreen).then(String) }).toBeLessThanOrEqual(390)
}

/** As a phone opens the page: loaded at that width, not a desktop page squeezed; then it must fit. */
export async function atPhoneWidth(page: Page) {
  await page.setViewportSize({ width: 390, height: 844 })
  await reloadHydrated(page)
  await expectFitsPhone(page)
}

/** Switches the console to its dark theme and waits until the page wears it. */
export async function darkTheme(page: Page) {
  await page.getByRole('button', { name: 'Dark theme' }).click()
  await expect.poll(() => page.evaluate(() => document.documentElement.classList.contains('dark'))).toBe(true)
}
