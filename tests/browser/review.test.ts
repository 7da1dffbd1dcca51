import { readFileSync } from 'node:fs'
import { createRequire } from 'node:module'
import { createPage } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { describe, expect, it } from 'vitest'
import { hashPassword } from '../../scripts/lib/password'
import { expectAccessible, shot, signInThroughForm } from '../support/browser'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'

await useArcwise({ browser: true })

const axeSource = readFileSync(createRequire(import.meta.url).resolve('axe-core/axe.min.js'), 'utf8')

/** Every axe-core violation on the page, whatever its impact (the review screens are held to none). */
async function axeViolations(page: Page) {
  await page.evaluate(axeSource)
  return page.evaluate(async () => {
    const result = await (window as unknown as { axe: { run: () => Promise<{ violations: { id: string, nodes: { target: string[] }[] }[] }> } }).axe.run()
    return result.violations.map(v => `${v.id}: ${v.nodes.map(n => n.target.join(' ')).join(', ')}`)
  })
}

describe('the review queue', () => {
  it('a lab manager releases a held result from the queue, rejects another with a comment and retracts the released one with a reason', async () => {
    const { lab, key } = await labWithInstrument({ release: 'review' })
    const email = `${unique('manager')}@example.org`
    await testDb()`insert into users (email, name, password_hash, role, lab_id) values (${email}, 'Queue Manager', ${await hashPassword('queue-manager-passphrase')}, 'lab_manager', ${lab.id})`
    const post = async (runId: string) => (await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(runId, 1500), bearer(key.secret))).body
    const first = await post(unique('first'))
    const second = await post(unique('second'))

    const page = await createPage('/sign-in')
    await signInThroughForm(page, email, 'queue-manager-passphrase')
    await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Review' }).click()
    await page.waitForURL(/\/review$/)
    const table = page.getByRole('table', { name: /Results held for review/ })
    await expect.poll(() => table.getByRole('row').count()).toBe(3)
    await expect.poll(() => table.textContent()).toContain('uncalibrated')
    await expectAccessible(page)
    expect(await axeViolations(page)).toEqual([])
    await shot(page, 'review-queue')

    await page.getByRole('checkbox', { name: `Choose ${first.runId}` }).check()
    page.once('dialog', dialog => dialog.accept())
    await page.getByRole('button', { name: 'Release 1 chosen' }).click()
    await expect.poll(() => page.getByRole('alert').first().textContent()).toContain('Released 1 result.')
    await expect.poll(() => table.textContent()).not.toContain(first.runId)
    expect(await table.textContent()).toContain(second.runId)
    expect((await testDb()`select review_state from results where id = ${first.result.id}`)[0]!.review_state).toBe('released')
    await shot(page, 'review-queue-released')

    // The other one, from its own page: rejected with a comment.
    await table.getByRole('link', { name: second.runId }).click()
    await page.waitForURL(new RegExp(`/acquisitions/${second.id}$`))
    await expect.poll(() => page.getByTestId('review-state').textContent()).toBe('Held for review')
    await page.getByRole('button', { name: 'Reject' }).click()
    await expect.poll(() => page.getByRole('alert').first().textContent()).toContain('Write a comment')
    await page.getByLabel('Comment (required to reject)').fill('Source pressure out of range during the run.')
    await page.getByRole('button', { name: 'Reject' }).click()
    await expect.poll(() => page.getByTestId('review-state').textContent()).toBe('Rejected')
    await expect.poll(() => page.getByRole('main').textContent()).toContain('Source pressure out of range during the run.')
    await expectAccessible(page)
    expect(await axeViolations(page)).toEqual([])
    await shot(page, 'review-rejected')

    // The released one: retracted with a reason, after a confirmation.
    await page.goto(page.url().replace(second.id, first.id), { waitUntil: 'hydration' } as never)
    await expect.poll(() => page.getByTestId('review-state').textContent()).toBe('Released')
    expect(await page.getByRole('main').textContent()).toContain('Queue Manager')
    await page.getByLabel('Reason for retraction (required)').fill('Sample label mix-up found at the weekly audit.')
    page.once('dialog', dialog => dialog.accept())
    await page.getByRole('button', { name: 'Retract' }).click()
    await expect.poll(() => page.getByTestId('review-state').textContent()).toBe('Retracted')
    await expect.poll(() => page.getByRole('main').textContent()).toContain('Sample label mix-up found at the weekly audit.')
    await shot(page, 'review-retracted')
  })
})
