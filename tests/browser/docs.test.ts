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

  it('looks like Arcwise, links back to the console, and explains the partner routes with real examples', async () => {
    const page = await createPage('/docs')
    await expect.poll(() => page.locator('body').textContent(), { timeout: 30_000 }).toContain('Post an acquisition')
    // Arcwise's accent and fonts, not the renderer's own.
    const look = await page.evaluate(() => ({ dark: document.body.classList.contains('dark-mode'), accent: getComputedStyle(document.body).getPropertyValue('--scalar-color-accent').trim(), font: getComputedStyle(document.body).getPropertyValue('--scalar-font') }))
    // The console's accent of the same theme (app/assets/css/main.css).
    expect(look.accent).toBe(look.dark ? 'rgb(86 196 193)' : 'rgb(14 107 110)')
    expect(look.font).toContain('Inter')
    const back = page.getByRole('link', { name: /Back to the Arcwise console/ }).first()
    expect(await back.getAttribute('href')).toBe('/console')
    await page.getByRole('button', { name: /Partners/ }).first().click()
    const body = () => page.locator('body').textContent()
    await expect.poll(body, { timeout: 30_000 }).toContain('A partner (a client lab, a regulator, a data team) receives the results')
    await expect.poll(body).toContain('Lower end of the window, inclusive')
    const text = (await body())!
    expect(text).toContain('client_credentials')
    expect(text).not.toContain('"expires_in": 1,')
    await shot(page, 'docs-arcwise')
  })
})
