import { createPage } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs } from '../support/browser'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise({ browser: true })

describe('exchange schemas in the console', () => {
  it('an admin deprecates a version with a sunset date; lab systems then see the headers; and makes it current again', async () => {
    const page = await createPage('/sign-in')
    await signInAs(page, 'admin')
    await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Exchange schemas' }).click()
    await page.waitForURL(/\/console\/schemas$/)
    const item = page.getByRole('listitem', { name: 'acquisition v1' })
    // Deprecated without a sunset date: refused on the field.
    await item.getByLabel('Status', { exact: true }).selectOption('deprecated')
    await item.getByRole('button', { name: 'Save status' }).click()
    await expect.poll(() => item.getByRole('alert').first().textContent()).toContain('sunset')
    await item.getByLabel('Sunset', { exact: true }).fill('2027-06-30')
    // The error goes once the field is fixed, before anything is sent.
    await expect.poll(() => item.getByRole('alert').count()).toBe(0)
    // Deprecating asks first: declined, nothing changes.
    let question = ''
    page.once('dialog', (dialog) => { question = dialog.message(); void dialog.dismiss() })
    await item.getByRole('button', { name: 'Save status' }).click()
    await expect.poll(() => question).toContain('Deprecate acquisition v1?')
    expect(question).toContain('refused after 2027-06-30')
    expect((await new ConsoleClient().request('GET', '/api/v1/schemas/acquisition/1')).headers.get('deprecation')).toBeNull()
    page.once('dialog', dialog => void dialog.accept())
    await item.getByRole('button', { name: 'Save status' }).click()
    // The badge (not the field labels or the status options) says what was saved.
    const badge = () => page.getByRole('listitem', { name: 'acquisition v1' }).locator('.aw-badge').first().textContent()
    await expect.poll(badge).toBe('deprecated')
    await expectAccessible(page)
    await shot(page, 'schemas-deprecated')
    const schema = await new ConsoleClient().request('GET', '/api/v1/schemas/acquisition/1')
    expect(schema.headers.get('sunset')).toContain('2027')
    await page.getByRole('listitem', { name: 'acquisition v1' }).getByLabel('Status', { exact: true }).selectOption('current')
    await page.getByRole('listitem', { name: 'acquisition v1' }).getByRole('button', { name: 'Save status' }).click()
    await expect.poll(badge).toBe('current')
    expect((await new ConsoleClient().request('GET', '/api/v1/schemas/acquisition/1')).headers.get('deprecation')).toBeNull()
  })
})
