import { url } from '@nuxt/test-utils/e2e'
import { afterAll, beforeAll, describe, expect, it } from 'vitest'
import { atPhoneWidth, darkTheme, expectAccessible, shot, signedInPage } from '../support/browser'
import { clearScene, goneOrOkSink, homeScene } from '../support/homes'
import { testDb, useArcwise } from '../support/server'

const SINK_PORT = 4234
await useArcwise({ browser: true, env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })

// Issue 21, point 2: on a result's page, did it reach its partners, verified? On a delivery's
// page, why it stopped, and a signature checked in one action; the partner's webhooks page
// organised around results by lab.

let scene: Awaited<ReturnType<typeof homeScene>>
let goneDelivery = ''
beforeAll(async () => {
  await goneOrOkSink(SINK_PORT)
  scene = await homeScene(SINK_PORT)
  goneDelivery = (await testDb()<{ id: string }[]>`select id from deliveries where endpoint_id = ${scene.goneEndpoint.id}`)[0]!.id
}, 120_000)
afterAll(() => clearScene(scene))

describe('the acquisition page\'s delivery trail', () => {
  it('a lab manager sees which endpoints received the released version, verified, and why one stopped', async () => {
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${scene.saltmarsh}/acquisitions/${scene.released.id}`), { waitUntil: 'hydration' })
    const trail = page.getByRole('region', { name: 'Did it reach its partners?' })
    const released = trail.getByTestId('trail-result.released')
    await expect.poll(() => released.textContent()).toContain('version 1')
    const ok = released.getByTestId('trail-delivery').filter({ hasText: `/ok/${scene.tag}` })
    expect(await ok.textContent()).toContain('succeeded')
    expect(await ok.getByTestId('trail-signature').textContent()).toContain('Verified. The recorded signature verifies with the endpoint\'s current secret.')
    const gone = released.getByTestId('trail-delivery').filter({ hasText: `/gone/${scene.tag}` })
    expect(await gone.getByTestId('trail-why').textContent()).toContain('the receiver answered 410 Gone, which disables the endpoint')
    // A lab manager may not replay a partner's delivery nor open a partner's log.
    expect(await trail.getByRole('button', { name: /Replay/ }).count()).toBe(0)
    // The request id the lab system posted it under, to find the hub's log lines about it.
    const requestId = `lab-${scene.tag}-released`
    expect(await page.getByTestId('request-id').textContent()).toBe(requestId)
    await page.context().grantPermissions(['clipboard-read', 'clipboard-write'])
    await page.getByRole('button', { name: 'Copy the request id' }).click()
    await expect.poll(() => page.evaluate(() => navigator.clipboard.readText())).toBe(requestId)
    expect(await page.getByRole('status').filter({ hasText: 'Copied' }).count()).toBe(1)
    await expectAccessible(page)
    await shot(page, 'trail-lab-manager')
    // The acquisition page at phone width: it fits the phone (no sideways scrolling), screenshot and axe.
    await atPhoneWidth(page)
    await trail.scrollIntoViewIfNeeded()
    await shot(page, 'trail-lab-manager-phone')
    await darkTheme(page)
    await expectAccessible(page)
  })

})

describe('the delivery page and the webhooks page', () => {
  it('an integrator reads why a delivery stopped and checks an attempt\'s signature in one action', async () => {
    const page = await signedInPage('integrator')
    await page.goto(url(`/console/partners/${scene.northgate}/deliveries/${goneDelivery}`), { waitUntil: 'hydration' })
    await expect.poll(() => page.getByTestId('delivery-why').textContent()).toContain('Stopped: the receiver answered 410 Gone, which disables the endpoint')
    await page.getByRole('button', { name: 'Check signature of attempt 1' }).click()
    await expect.poll(() => page.getByRole('status').filter({ hasText: 'signature' }).first().textContent()).toContain('verifies with the endpoint\'s current secret')
    await expectAccessible(page)
    await shot(page, 'delivery-why-and-signature')
    await atPhoneWidth(page)
    await shot(page, 'delivery-why-phone')
    await darkTheme(page)
    await expectAccessible(page)
  })

  it('the webhooks page answers by lab and result: delivered or not, verified or not', async () => {
    const page = await signedInPage('integrator')
    await page.goto(url(`/console/partners/${scene.northgate}/webhooks`), { waitUntil: 'hydration' })
    const lab = page.getByTestId('board-lab').filter({ hasText: 'Saltmarsh Stable Isotope Lab' })
    const result = lab.getByTestId('board-result').filter({ hasText: `${scene.tag}-released` })
    await expect.poll(() => result.textContent()).toContain('verified')
    expect(await result.textContent()).toContain(`/ok/${scene.tag}`)
    expect(await result.textContent()).toContain(`/gone/${scene.tag}`)
    await expectAccessible(page)
    await shot(page, 'webhooks-by-result')
    await atPhoneWidth(page)
    await shot(page, 'webhooks-by-result-phone')
    await darkTheme(page)
    await expectAccessible(page)
    await result.getByRole('link').filter({ hasText: `/gone/${scene.tag}` }).click()
    await page.waitForURL(u => u.pathname === `/console/partners/${scene.northgate}/deliveries/${goneDelivery}`)
  })
})

describe('replay from the result\'s page', () => {
  it('an admin replays the dead delivery from the result\'s page', async () => {
    const page = await signedInPage('admin')
    await page.goto(url(`/console/labs/${scene.saltmarsh}/acquisitions/${scene.released.id}`), { waitUntil: 'hydration' })
    const trail = page.getByRole('region', { name: 'Did it reach its partners?' })
    await trail.getByTestId('trail-result.released').getByTestId('trail-delivery').filter({ hasText: `/gone/${scene.tag}` })
      .getByRole('button', { name: 'Replay to Northgate Water Authority' }).click()
    await expect.poll(() => trail.getByRole('alert').textContent()).toContain('Queued')
    const [row] = await testDb()<{ replay_requested: boolean }[]>`select replay_requested from deliveries where id = ${goneDelivery}`
    expect(row!.replay_requested).toBe(true)
    await shot(page, 'trail-admin-replayed')
  })
})
