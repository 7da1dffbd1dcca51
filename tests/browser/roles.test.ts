import { createPage, url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import type { Role } from '../../shared/types/roles'
import { expectAccessible, shot, signInAs, signInThroughForm } from '../support/browser'
import { demoUser } from '../support/demo'
import { useArcwise } from '../support/server'

await useArcwise({ browser: true })

const menus: Record<Role, string[]> = {
  admin: ['Overview', 'Labs', 'Partners', 'Reference materials', 'Exchange schemas', 'Verify a certificate', 'Users and invitations', 'Audit log'],
  lab_manager: ['Overview', 'Labs', 'Review', 'Sequences', 'Control charts', 'Reference materials', 'Exchange schemas', 'Verify a certificate'],
  lab_reviewer: ['Overview', 'Labs', 'Review', 'Sequences', 'Control charts', 'Reference materials', 'Exchange schemas', 'Verify a certificate'],
  integrator: ['Overview', 'Partners', 'Webhooks', 'Deliveries', 'Reference materials', 'Exchange schemas', 'Verify a certificate'],
  viewer: ['Overview', 'Labs', 'Partners', 'Reference materials', 'Exchange schemas', 'Verify a certificate', 'Users and invitations', 'Audit log'],
}
const refused: Record<Role, string[]> = {
  admin: [],
  lab_manager: ['/console/users', '/console/audit', '/console/partners'],
  lab_reviewer: ['/console/users', '/console/audit', '/console/partners'],
  integrator: ['/console/users', '/console/audit', '/console/labs'],
  viewer: [],
}

describe('each role in the console', () => {
  it('signed out, the console sends you to sign in and comes back after', async () => {
    const page = await createPage('/console/labs')
    await page.waitForURL(/\/sign-in\?next=/)
    await expectAccessible(page)
    await shot(page, 'signed-out-sign-in')
    await signInAs(page, 'admin')
    // By path: the sign-in URL itself ends in `next=/console/labs`.
    await page.waitForURL(u => u.pathname === '/console/labs')
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe('Labs')
  })

  it('a wrong password shows the message on the form', async () => {
    const page = await createPage('/sign-in')
    await page.getByLabel('E-mail').fill(demoUser('viewer').email)
    await page.getByLabel('Password').fill('not the password')
    await page.getByRole('button', { name: 'Sign in' }).click()
    await expect.poll(() => page.getByRole('alert').first().textContent()).toContain('The e-mail or the password is wrong.')
    await shot(page, 'sign-in-wrong-password')
  })

  it.each(Object.keys(menus) as Role[])('%s sees their menu, their pages, and is refused the others', async (role) => {
    const user = demoUser(role)
    const page = await createPage('/sign-in')
    await signInThroughForm(page, user.email, user.password)
    const nav = page.getByRole('navigation', { name: 'Console' })
    await expect.poll(async () => (await nav.getByRole('link').allTextContents()).map(t => t.trim())).toEqual(menus[role])
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toContain(user.name)
    await expectAccessible(page)
    await shot(page, `${role}-overview`)
    // The heading with its subtitle: two of an integrator's pages share a title (the partner's name).
    const pageHeader = () => page.locator('h1').locator('xpath=..').innerText()
    for (const link of menus[role].slice(1)) {
      const before = await pageHeader()
      const target = nav.getByRole('link', { name: link })
      const href = await target.getAttribute('href')
      await target.click()
      // The new page's own header, not the previous page's still on screen.
      await page.waitForURL(u => u.pathname === href)
      await expect.poll(pageHeader).not.toBe(before)
      await expectAccessible(page)
      await shot(page, `${role}-${link.toLowerCase().replace(/\W+/g, '-')}`)
    }
    for (const path of refused[role]) {
      await page.goto(url(path))
      await expect.poll(() => page.locator('body').textContent()).toContain('Not allowed')
    }
  })

  it('the dark theme is a click away and stays after reload', async () => {
    const page = await createPage('/sign-in')
    await page.getByRole('button', { name: 'Dark theme' }).click()
    await expect.poll(() => page.evaluate(() => document.documentElement.classList.contains('dark'))).toBe(true)
    await page.reload()
    await expect.poll(() => page.evaluate(() => document.documentElement.classList.contains('dark'))).toBe(true)
    await expectAccessible(page)
    await shot(page, 'sign-in-dark')
  })
})
