import { createPage } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, openLabFromMenu, shot, signInAs } from '../support/browser'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise({ browser: true })

/** Signs in as the demo lab manager and walks the menu to a tab of their lab, as they would. */
async function openOwnLabTab(tab: string, at: RegExp) {
  const page = await createPage('/sign-in')
  await signInAs(page, 'lab_manager')
  await openLabFromMenu(page, 'Saltmarsh Stable Isotope Lab')
  await page.getByRole('link', { name: tab }).click()
  await page.waitForURL(at)
  return page
}

describe('lab keys in the console', () => {
  it('a lab manager issues a key (shown once), a lab system uses it, and the manager revokes it', async () => {
    const page = await openOwnLabTab('API keys', /\/keys$/)
    await expectAccessible(page)
    // A key without scopes is refused on the field.
    await page.getByLabel('Name').fill('Bench 3 instrument PC')
    for (const box of await page.getByRole('checkbox').all()) await box.uncheck()
    await page.getByRole('button', { name: 'Issue key' }).click()
    await expect.poll(() => page.getByRole('alert').last().textContent()).toContain('choose at least one scope')
    for (const box of await page.getByRole('checkbox').all()) await box.check()
    await page.getByRole('button', { name: 'Issue key' }).click()
    const secret = (await page.getByTestId('console-secret').textContent())!
    expect(secret).toMatch(/^awk_[A-Za-z0-9_-]{12}_[A-Za-z0-9_-]{43}$/)
    // Copied as shown, and the outcome said in a status, not by renaming the button.
    await page.context().grantPermissions(['clipboard-read', 'clipboard-write'])
    await page.getByRole('button', { name: 'Copy the secret' }).click()
    await expect.poll(() => page.evaluate(() => navigator.clipboard.readText())).toBe(secret)
    expect(await page.getByRole('status').filter({ hasText: 'Copied' }).count()).toBeGreaterThan(0)
    await shot(page, 'lab-key-issued')

    // The lab system uses it: the list shows when.
    const read = await new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, { authorization: `Bearer ${secret}` })
    expect(read.status).toBe(200)
    await page.reload()
    const row = page.getByRole('row', { name: /Bench 3 instrument PC/ })
    await expect.poll(() => row.textContent()).not.toContain('not yet')

    page.once('dialog', dialog => dialog.accept())
    await row.getByRole('button', { name: 'Revoke Bench 3 instrument PC' }).click()
    await expect.poll(() => row.textContent()).toContain('revoked')
    expect((await new ConsoleClient().request('GET', '/api/v1/acquisitions', undefined, { authorization: `Bearer ${secret}` })).status).toBe(401)
    await expectAccessible(page)
    await shot(page, 'lab-key-revoked')
  })

  it('a lab manager grants a partner access to the lab\'s results and revokes it', async () => {
    const page = await openOwnLabTab('Partner access', /\/access$/)
    // The demo grants Northgate Water Authority; Tidewater Clinical Research is not granted yet.
    await expect.poll(() => page.getByRole('table').textContent()).toContain('Northgate Water Authority')
    await page.getByLabel('Partner', { exact: true }).selectOption({ label: 'Tidewater Clinical Research' })
    await page.getByRole('button', { name: 'Grant access' }).click()
    const row = page.getByRole('row', { name: /Tidewater Clinical Research/ })
    await expect.poll(() => row.textContent()).toContain('result.released')
    await expectAccessible(page)
    await shot(page, 'lab-partner-access')
    page.once('dialog', dialog => dialog.accept())
    await row.getByRole('button', { name: 'Revoke access of Tidewater Clinical Research' }).click()
    await expect.poll(() => page.getByRole('table').textContent()).not.toContain('Tidewater Clinical Research')
  })
})
