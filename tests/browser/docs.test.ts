import { createPage } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { shot } from '../support/browser'
import { useArcwise } from '../support/server'

await useArcwise({ browser: true })

describe('API documentation at /docs', () => {
  it('renders the generated OpenAPI document with its operations and the caution', async () => {
    const page = await createPage('/docs')
    for (const text of ['Post an acquisition', 'quality system']) {
      await expect.poll(() => page.locator('body').textContent(), { timeout: 30_000 }).toContain(text)
    }
    // The partners' operations are one click away in the sidebar.
    await page.getByRole('button', { name: /Partners/ }).first().click()
    await expect.poll(() => page.locator('body').textContent(), { timeout: 30_000 }).toContain('Pull the event feed')
    await shot(page, 'docs')
    // Fonts ship with the app: nothing is fetched from another host.
    const foreign = await page.evaluate(() => performance.getEntriesByType('resource').map(e => e.name).filter(n => !n.startsWith(location.origin)))
    expect(foreign).toEqual([])
  })
})
