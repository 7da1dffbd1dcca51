import { createPage, url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs } from '../support/browser'
import { demoUser } from '../support/demo'
import { ConsoleClient, useArcwise } from '../support/server'

await useArcwise({ browser: true })

describe('ending a person\'s sessions from the console', () => {
  it('an admin ends the viewer\'s sessions after confirming, and the viewer\'s open session is refused at once', async () => {
    const viewer = await new ConsoleClient().signIn(demoUser('viewer').email, demoUser('viewer').password)
    expect((await viewer.get('/api/console/me')).status).toBe(200)

    const page = await createPage('/sign-in')
    await signInAs(page, 'admin')
    await page.goto(url('/console/users'))
    const button = page.getByRole('button', { name: `End sessions of ${demoUser('viewer').email}` })
    // Dismissing the confirmation changes nothing.
    page.once('dialog', dialog => void dialog.dismiss())
    await button.click()
    expect((await viewer.get('/api/console/me')).status).toBe(200)

    let question = ''
    page.once('dialog', (dialog) => { question = dialog.message(); void dialog.accept() })
    await button.click()
    await expect.poll(() => page.getByRole('status').filter({ hasText: /sessions? ended/ }).count()).toBeGreaterThan(0)
    expect(question).toContain(demoUser('viewer').email)
    expect((await viewer.get('/api/console/me')).status).toBe(401)
    await expectAccessible(page)
    await shot(page, 'users-sessions-ended')
  })
})
