import { url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { describe, expect, it } from 'vitest'
import { darkTheme, expectAccessible, shot, signedInPage } from '../support/browser'
import { labWithInstrument } from '../support/lab'
import { testDb, unique, useArcwise } from '../support/server'

await useArcwise({ browser: true })

// Issue 21, point 6: errors go when the field is fixed, every input is labelled, no silent
// 0 for an uncertainty, no silent duplicate grant, destructive and bulk actions ask first,
// slug and kind are the admin's, and no developer command shows in the console.

const labId = async (slug: string) => (await testDb()<{ id: string }[]>`select id from labs where slug = ${slug}`)[0]!.id
const partnerId = async (slug: string) => (await testDb()<{ id: string }[]>`select id from partners where slug = ${slug}`)[0]!.id
const hydrated = (page: Page) => page.waitForFunction(() => (window as unknown as { useNuxtApp?: () => { isHydrating: boolean } }).useNuxtApp?.().isHydrating === false)

describe('forms in the console', () => {
  it('an uncertainty has a visible label and no silent 0; its error goes once it is typed', async () => {
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${await labId('saltmarsh-isotopes')}/instruments`), { waitUntil: 'hydration' })
    const form = page.getByRole('form', { name: 'Register an instrument' })
    await form.getByLabel('Name', { exact: true }).fill('Forms sector')
    await form.getByLabel('Slug', { exact: true }).fill(unique('forms').toLowerCase())
    await form.getByLabel('Analyzer radius: value').fill('27')
    expect(await form.getByLabel('Analyzer radius: standard uncertainty').inputValue()).toBe('')
    // The label is on screen, not only for screen readers (an sr-only label is one pixel wide).
    const uLabel = form.locator('label', { hasText: 'standard uncertainty' }).first()
    expect((await uLabel.boundingBox())!.width).toBeGreaterThan(40)
    await form.getByRole('button', { name: 'Register instrument' }).click()
    await expect.poll(() => form.getByRole('alert').allTextContents()).toContainEqual(expect.stringContaining('uncertainty must be a number'))
    expect(new URL(page.url()).pathname).toMatch(/\/instruments$/)
    await expectAccessible(page)
    await shot(page, 'form-uncertainty-required')
    await form.getByLabel('Analyzer radius: standard uncertainty').fill('0.01')
    await expect.poll(() => form.getByRole('alert').count()).toBe(0)
  })

  it('granting a partner that already has the same grant says so on the field', async () => {
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${await labId('saltmarsh-isotopes')}/access`), { waitUntil: 'hydration' })
    const form = page.getByRole('form', { name: 'Grant a partner access' })
    await form.getByLabel('Partner').selectOption({ label: 'Northgate Water Authority' })
    // The same events as the grant the demo seeded.
    const [grant] = await testDb()<{ event_types: string[] }[]>`select g.event_types from grants g join partners p on p.id = g.partner_id join labs l on l.id = g.lab_id where p.slug = 'northgate-water' and l.slug = 'saltmarsh-isotopes'`
    for (const box of await form.getByRole('checkbox').all()) {
      const type = (await box.getAttribute('value'))!
      await box.setChecked(grant!.event_types.includes(type))
    }
    await form.getByRole('button', { name: 'Grant access' }).click()
    await expect.poll(() => form.getByRole('alert').allTextContents()).toContainEqual(expect.stringContaining('already receives this lab\'s results'))
    await expectAccessible(page)
    await shot(page, 'form-duplicate-grant')
  })

  it('disabling a person and a bulk replay ask first; declined, nothing changes', async () => {
    const email = `${unique('calm')}@example.org`
    await testDb()`insert into users (email, name, password_hash, role) values (${email}, 'Calm Person', 'x', 'viewer')`
    const page = await signedInPage('admin')
    await page.goto(url(`/console/users?q=${encodeURIComponent(email)}`), { waitUntil: 'hydration' })
    await page.getByRole('button', { name: `Change ${email}` }).click()
    await page.getByLabel('Status').selectOption('disabled')
    let question = ''
    page.once('dialog', (dialog) => { question = dialog.message(); void dialog.dismiss() })
    await page.getByRole('button', { name: 'Save', exact: true }).click()
    await expect.poll(() => question).toContain(`Disable ${email}?`)
    expect((await testDb()<{ status: string }[]>`select status from users where email = ${email}`)[0]!.status).toBe('active')

    await page.goto(url(`/console/partners/${await partnerId('northgate-water')}/deliveries`), { waitUntil: 'hydration' })
    question = ''
    page.once('dialog', (dialog) => { question = dialog.message(); void dialog.dismiss() })
    await page.getByRole('button', { name: 'Replay dead deliveries that match' }).click()
    await expect.poll(() => question).toContain('Send again every dead delivery that matches')
    expect(await page.getByRole('status').first().textContent()).toBe('')
  })

  it('an integrator sees the partner\'s slug and kind but cannot change them', async () => {
    const page = await signedInPage('integrator')
    await page.goto(url(`/console/partners/${await partnerId('northgate-water')}`), { waitUntil: 'hydration' })
    await hydrated(page)
    expect(await page.getByLabel('Slug', { exact: true }).getAttribute('readonly')).not.toBeNull()
    expect(await page.getByLabel('Kind', { exact: true }).isDisabled()).toBe(true)
    await expect.poll(() => page.getByRole('main').textContent()).toContain('Only a hub admin changes the slug')
    await expectAccessible(page)
    await shot(page, 'form-partner-integrator')
  })

  it('the API keys page names no developer command', async () => {
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${await labId('saltmarsh-isotopes')}/keys`), { waitUntil: 'hydration' })
    await expect.poll(() => page.getByRole('main').textContent()).toContain('API documentation')
    expect(await page.getByRole('main').textContent()).not.toContain('npm run')
  })
})

describe('upload help (point 4)', () => {
  it('describes each format with a template; the templates upload as they are, several at once; a run older than the geometry is refused with the fix', async () => {
    const { lab } = await labWithInstrument()
    const page = await signedInPage('admin')
    await page.goto(url(`/console/labs/${lab.id}/acquisitions`), { waitUntil: 'hydration' })
    const form = page.getByRole('form', { name: 'Upload acquisition files' })
    // The form comes before the table.
    expect(await page.evaluate(() => {
      const f = document.querySelector('form[aria-label="Upload acquisition files"]')
      const t = document.querySelector('main table') ?? document.querySelector('main [class*="empty"]')
      return !!f && (!t || !!(f.compareDocumentPosition(t) & Node.DOCUMENT_POSITION_FOLLOWING))
    })).toBe(true)
    await form.getByText('Accepted formats and templates').click()
    await expect.poll(() => form.textContent()).toContain('# ratio: ID heavy light')
    const templates: { name: string, mimeType: string, buffer: Buffer }[] = []
    for (const [format, file, mimeType] of [['CSV', 'acquisition.csv', 'text/csv'], ['JCAMP-DX', 'acquisition.jdx', 'chemical/x-jcamp-dx'], ['mzML', 'acquisition.mzML', 'application/mzml+xml'], ['JSON', 'acquisition.json', 'application/json']] as const) {
      const href = await form.getByRole('link', { name: `Download the ${format} template` }).getAttribute('href')
      expect(href).toBe(`/templates/${file}`)
      const res = await page.request.get(url(href!))
      expect(res.status()).toBe(200)
      templates.push({ name: file, mimeType, buffer: await res.body() })
    }
    await expectAccessible(page)
    await shot(page, 'upload-formats-help')

    // Dropped on the form: a CSV acquired before the instrument's first geometry.
    const old = templates[0]!.buffer.toString().replace('# acquiredAt: 2026-11-30T09:00:00Z', '# acquiredAt: 2025-06-01T09:00:00Z').replace('CO2-2026-0412', 'CO2-2025-0001')
    const dataTransfer = await page.evaluateHandle((text) => {
      const dt = new DataTransfer()
      dt.items.add(new File([text], 'old-run.csv', { type: 'text/csv' }))
      return dt
    }, old)
    await form.locator('.border-dashed').dispatchEvent('drop', { dataTransfer })
    await expect.poll(() => form.getByRole('list', { name: 'Files to upload' }).textContent()).toContain('old-run.csv')
    await form.getByRole('button', { name: 'Upload' }).click()
    await expect.poll(() => form.textContent()).toContain('is before the first geometry of ms-1')
    expect(await form.textContent()).toContain('register a geometry version valid from 2025-06-01 or earlier')
    await expect.poll(() => form.getByRole('link', { name: /register a geometry valid from that date/ }).getAttribute('href')).toBe(`/console/labs/${lab.id}/instruments`)
    await shot(page, 'upload-predates-geometry')

    // The four templates at once: each stored and linked, the page stays on the list.
    await form.getByLabel('Files', { exact: true }).setInputFiles(templates)
    await form.getByRole('button', { name: 'Upload' }).click()
    await expect.poll(() => form.getByRole('list', { name: 'Files to upload' }).getByText('stored', { exact: true }).count(), { timeout: 60_000 }).toBe(4)
    await expect.poll(() => page.getByRole('main').textContent()).toContain('4 acquisitions uploaded and processed.')
    for (const run of ['CO2-2026-0412', 'CO2-2026-0413', 'CO2-2026-0414', 'CO2-2026-0415']) expect(await page.getByRole('table').textContent()).toContain(run)
    await darkTheme(page)
    await expectAccessible(page)
    await shot(page, 'upload-several-files-dark')
  })
})
