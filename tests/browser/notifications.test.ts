import type { Page } from 'playwright-core'
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import { expectAccessible, expectFitsPhone, reloadHydrated, shot, signedInPage } from '../support/browser'
import { clearScene, goneOrOkSink, homeScene } from '../support/homes'
import { useArcwise } from '../support/server'

const SINK_PORT = 4235
await useArcwise({ browser: true, env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

// Issue 21, point 3: the bell in the console's header lists what needs this person, within
// their scope, each item leading to where it is fixed; what was seen is remembered.

let scene: Awaited<ReturnType<typeof homeScene>>
beforeAll(async () => {
  await goneOrOkSink(SINK_PORT)
  scene = await homeScene(SINK_PORT)
}, 120_000)
afterAll(() => clearScene(scene))

const bell = (page: Page) => page.getByRole('button', { name: /^Notifications/ })
const panel = (page: Page) => page.getByRole('region', { name: 'Notifications' })
async function openBell(page: Page) {
  await expect.poll(() => bell(page).getAttribute('aria-label')).toMatch(/new$/)
  await bell(page).click()
  await expect.poll(() => panel(page).isVisible()).toBe(true)
}

describe('the notifications bell', () => {
  it('a lab manager is told of results to review, the chart violation and the partner endpoint disabled; an item leads to its fix and is then seen', async () => {
    const page = await signedInPage('lab_manager')
    await openBell(page)
    const text = (await panel(page).textContent())!
    expect(text).toMatch(/waiting for review/)
    expect(text).toContain('Control chart out of control: SM-MARBLE d13C')
    expect(text).toContain('Webhook endpoint disabled: Northgate Water Authority')
    expect(text).not.toContain('ELSEWHERE-STD')
    expect(text).not.toContain(scene.other.partner.name)
    await expectAccessible(page)
    await shot(page, 'notifications-lab-manager')
    const before = Number(await page.getByTestId('notification-count').textContent())
    await panel(page).getByRole('link', { name: /SM-MARBLE d13C/ }).filter({ hasText: `Home sector ${scene.tag}` }).click()
    await page.waitForURL(u => u.pathname === `/console/labs/${scene.saltmarsh}/control-charts/${scene.instrument.id}`)
    await expect.poll(async () => Number(await page.getByTestId('notification-count').textContent())).toBe(before - 1)
    // Seen survives a reload (kept by this browser, per user).
    await reloadHydrated(page)
    await expect.poll(async () => Number(await page.getByTestId('notification-count').textContent())).toBe(before - 1)
  })

  it('an integrator is told only of its partner\'s endpoint and dead deliveries, at phone width and in the dark theme', async () => {
    const page = await signedInPage('integrator')
    await page.setViewportSize({ width: 390, height: 844 })
    await reloadHydrated(page)
    await openBell(page)
    const text = (await panel(page).textContent())!
    expect(text).toContain('Webhook endpoint disabled: Northgate Water Authority')
    expect(text).toMatch(/dead deliver(y|ies) to Northgate Water Authority/)
    expect(text).not.toContain('Control chart')
    expect(text).not.toContain(scene.other.partner.name)
    await expectFitsPhone(page)
    await shot(page, 'notifications-integrator-phone')
    await page.getByRole('button', { name: 'Mark all as seen' }).click()
    await expect.poll(() => page.getByTestId('notification-count').count()).toBe(0)
    await page.keyboard.press('Escape')
    await expect.poll(() => panel(page).isVisible()).toBe(false)
    await page.getByRole('button', { name: 'Dark theme' }).click()
    await bell(page).click()
    await expectAccessible(page)
    await shot(page, 'notifications-integrator-dark')
  })

  it('an admin is told of every lab\'s chart violations and every partner\'s disabled endpoints', async () => {
    const page = await signedInPage('admin')
    await openBell(page)
    const text = (await panel(page).textContent())!
    expect(text).toContain('ELSEWHERE-STD')
    expect(text).toContain('SM-MARBLE')
    expect(text).toContain(`Webhook endpoint disabled: ${scene.other.partner.name}`)
    await expectAccessible(page)
    await shot(page, 'notifications-admin')
  })
})
