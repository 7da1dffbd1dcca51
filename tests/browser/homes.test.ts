import type { Page } from 'playwright-core'
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import { atPhoneWidth, darkTheme, expectAccessible, shot, signedInPage } from '../support/browser'
import { clearScene, goneOrOkSink, homeScene } from '../support/homes'
import { testDb, useArcwise } from '../support/server'
import type { Role } from '../../shared/types/roles'

const SINK_PORT = 4232
await useArcwise({ browser: true, env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

// Issue 21, point 1: each role starts the day on a home that answers "what needs me now",
// every item leading to where it is fixed; usable at phone width, light and dark.

let scene: Awaited<ReturnType<typeof homeScene>>
beforeAll(async () => {
  await goneOrOkSink(SINK_PORT)
  scene = await homeScene(SINK_PORT)
}, 120_000)
afterAll(() => clearScene(scene))

async function signIn(role: Role) {
  const page = await signedInPage(role)
  await page.waitForURL(u => u.pathname === '/console')
  return page
}

const region = (page: Page, name: string | RegExp) => page.getByRole('region', { name })

describe('a lab manager\'s home', () => {
  it('shows each instrument\'s last run, calibration, QC, control chart and review state, and the partner that does not receive', async () => {
    const page = await signIn('lab_manager')
    const card = page.getByTestId(`home-instrument-${scene.slug}`)
    await expect.poll(() => card.textContent()).toContain(`${scene.tag}-held`)
    const text = (await card.textContent())!
    expect(text).toContain('None in force: m/z is uncalibrated')
    expect(text).toContain('of 2 results flagged')
    expect(text).toContain('1 violation in 90 days')
    expect(text).toContain('1 to review')
    expect(await page.getByTestId('home-instrument-irms-north').textContent()).toMatch(/v1 in force, 6 days old/)
    const partners = region(page, 'Partners your results do not reach')
    expect(await partners.textContent()).toContain('Northgate Water Authority')
    expect(await partners.textContent()).toContain('the receiver answered 410 Gone')
    expect(await page.getByRole('main').textContent()).not.toContain(`${scene.tag}-other`)
    await expectAccessible(page)
    await shot(page, 'home-lab-manager')

    // Every item leads to where it is fixed: the chart with the violation.
    await card.getByRole('link', { name: /1 violation/ }).click()
    await page.waitForURL(u => u.pathname === `/console/labs/${scene.saltmarsh}/control-charts/${scene.instrument.id}` && u.searchParams.get('material') === 'SM-MARBLE')
    await page.goBack()
    await page.getByTestId('home-review').click()
    await page.waitForURL(u => u.pathname === `/console/labs/${scene.saltmarsh}/review`)
  })

  it('is usable at phone width, in the dark theme too', async () => {
    const page = await signIn('lab_manager')
    await page.getByTestId(`home-instrument-${scene.slug}`).waitFor()
    await atPhoneWidth(page)
    await expectAccessible(page)
    await shot(page, 'home-lab-manager-phone')
    await darkTheme(page)
    await expectAccessible(page)
    await shot(page, 'home-lab-manager-phone-dark')
  })
})

describe('an integrator\'s home', () => {
  it('shows its endpoints\' health, replays a dead delivery from the home, and the labs that grant it with their latest released results', async () => {
    const page = await signIn('integrator')
    const endpoints = region(page, /Your endpoints/)
    await expect.poll(() => endpoints.textContent()).toContain(`/gone/${scene.tag}`)
    const gone = page.getByTestId('home-endpoint').filter({ hasText: `/gone/${scene.tag}` })
    expect(await gone.textContent()).toContain('Disabled: the receiver answered 410 Gone')
    const ok = page.getByTestId('home-endpoint').filter({ hasText: `/ok/${scene.tag}` })
    expect(await ok.textContent()).toContain('healthy')
    const lab = page.getByTestId('home-lab').filter({ hasText: 'Saltmarsh Stable Isotope Lab' })
    expect(await lab.textContent()).toContain(`${scene.tag}-released`)
    expect(await page.getByRole('main').textContent()).not.toContain(scene.other.partner.name)
    await expectAccessible(page)
    await shot(page, 'home-integrator')
    await atPhoneWidth(page)
    await shot(page, 'home-integrator-phone')
    await darkTheme(page)
    await expectAccessible(page)

    const dead = region(page, 'Dead deliveries')
    await dead.getByRole('listitem').filter({ hasText: `/gone/${scene.tag}` }).getByRole('button', { name: `Replay result.released of ${scene.tag}-released` }).click()
    await expect.poll(() => dead.getByRole('alert').textContent()).toContain('Queued')
    const [row] = await testDb()<{ replay_requested: boolean, status: string }[]>`select replay_requested, status from deliveries where endpoint_id = ${scene.goneEndpoint.id}`
    expect(row).toMatchObject({ status: 'pending', replay_requested: true })
  })
})

describe('the hub\'s home', () => {
  it('an admin sees disabled endpoints, labs with work waiting and silent instruments, each linked to its fix', async () => {
    const page = await signIn('admin')
    const endpoints = page.getByTestId('home-hub-endpoints')
    await expect.poll(() => endpoints.textContent()).toContain(`/gone/${scene.tag}`)
    expect(await page.getByTestId('home-hub-labs').textContent()).toContain(`Elsewhere ${scene.tag}`)
    expect(await page.getByTestId('home-hub-stale').textContent()).toContain('never sent an acquisition')
    await expectAccessible(page)
    await shot(page, 'home-admin')
    await darkTheme(page)
    await expectAccessible(page)
    await shot(page, 'home-admin-dark')
    await endpoints.getByRole('link').filter({ hasText: 'Northgate Water Authority' }).filter({ hasText: `/gone/${scene.tag}` }).click()
    await page.waitForURL(u => u.pathname === `/console/partners/${scene.northgate}/webhooks`)
  })
})
