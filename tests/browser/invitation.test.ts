import { createPage } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs, signInThroughForm } from '../support/browser'
import { unique, useArcwise } from '../support/server'

await useArcwise({ browser: true })

describe('an invitation end to end', () => {
  it('an admin invites a lab manager, who opens the e-mail, sets a password and signs in', async () => {
    const email = `${unique('newcomer')}@saltmarsh.example`
    const page = await createPage('/sign-in')
    await signInAs(page, 'admin')
    await page.getByRole('link', { name: 'Users and invitations' }).click()
    const form = page.getByRole('form', { name: 'Invite a person' })
    await form.getByLabel('E-mail').fill(email)
    await form.getByLabel('Role').selectOption({ label: 'Lab manager' })
    // The form refuses a lab manager without a lab, on the field.
    await form.getByRole('button', { name: 'Send the invitation' }).click()
    await expect.poll(() => form.getByRole('alert').allTextContents()).toContain('a lab manager needs a lab')
    await shot(page, 'invite-missing-lab')
    await form.getByLabel('Lab').selectOption({ label: 'Saltmarsh Stable Isotope Lab' })
    await form.getByRole('button', { name: 'Send the invitation' }).click()
    await expect.poll(() => page.getByText(`Invitation sent to ${email}.`).count()).toBe(1)
    await expect.poll(() => page.locator('#invitations').textContent()).toContain(email)
    await shot(page, 'invite-sent')
    await page.getByRole('button', { name: 'Sign out' }).click()
    await page.waitForURL(/\/sign-in/)

    // Signed out, the newcomer reads the captured mail and follows the link.
    await page.getByRole('link', { name: 'Captured mail' }).click()
    const message = page.locator('li', { hasText: email }).first()
    await expect.poll(async () => {
      await page.getByRole('button', { name: 'Refresh' }).click()
      return message.count()
    }, { timeout: 15_000 }).toBe(1)
    await expectAccessible(page)
    await shot(page, 'captured-mail')
    await message.getByRole('link').first().click()
    await page.waitForURL(/\/invitations\//)
    await expect.poll(() => page.locator('main').textContent()).toContain('Saltmarsh Stable Isotope Lab')
    await page.getByLabel('Your name').fill('Noor Calloway')
    await page.getByLabel('Password').fill('short')
    await page.getByRole('button', { name: 'Create my account' }).click()
    await expect.poll(() => page.getByRole('alert').allTextContents()).toContain('must be at least 12 characters')
    await expectAccessible(page)
    await shot(page, 'accept-weak-password')
    await page.getByLabel('Password').fill('brackish water sampler')
    await page.getByRole('button', { name: 'Create my account' }).click()
    await page.waitForURL(/\/console$/)
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toContain('Noor Calloway')
    await shot(page, 'newcomer-overview')

    // And signs in again later with the new password.
    await page.getByRole('button', { name: 'Sign out' }).click()
    await page.waitForURL(/\/sign-in/)
    await signInThroughForm(page, email, 'brackish water sampler')
    await expect.poll(() => page.locator('aside').textContent()).toContain('Lab manager')
  })
})
