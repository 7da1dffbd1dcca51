import { url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { describe, expect, it } from 'vitest'
import { postAcquisition } from '../../scripts/lib/lab-system'
import { expectAccessible, openLabFromMenu, shot, signedInPage } from '../support/browser'
import { referenceAcquisition } from '../support/lab'
import { testDb, unique, useArcwise } from '../support/server'

await useArcwise({ browser: true })

async function openTab(page: Page, tab: string, at: RegExp) {
  await page.getByRole('navigation', { name: 'Lab' }).getByRole('link', { name: tab, exact: true }).click()
  await page.waitForURL(at)
}
/** The plot's pixels, to tell whether a control changed what it shows. */
const chartPixels = (page: Page) => page.locator('.aw-chart canvas').first().screenshot()

describe('a lab manager\'s main flow in the console', () => {
  it('registers an instrument and issues a key; the lab simulator posts; the acquisition appears with its plot and assignments; a calibration is fitted from it', async () => {
    const page = await signedInPage('lab_manager')
    await openLabFromMenu(page, 'Saltmarsh Stable Isotope Lab')
    await openTab(page, 'Instruments', /\/instruments$/)
    await expectAccessible(page)
    await shot(page, 'flow-01-instruments')

    // A geometry without its radius is refused on the field, and nothing is registered.
    const slug = unique('bench').toLowerCase()
    await page.getByLabel('Name', { exact: true }).fill('Bench 5 sector')
    await page.getByLabel('Slug', { exact: true }).fill(slug)
    await page.getByRole('button', { name: 'Register instrument' }).click()
    await expect.poll(() => page.getByRole('form', { name: 'Register an instrument' }).textContent()).toContain('must be a number')
    await page.getByLabel('Analyzer radius: value').fill('27')
    await page.getByLabel('Analyzer radius: unit').selectOption('cm')
    await page.getByLabel('Analyzer radius: standard uncertainty').fill('0.01')
    await page.getByRole('button', { name: 'Register instrument' }).click()
    await page.waitForURL(/\/instruments\/[0-9a-f-]{36}$/)
    const history = page.getByRole('region', { name: 'Geometry history' })
    await expect.poll(() => history.textContent()).toContain('analyzer radius 27 ± 0.01 cm')
    expect(await history.textContent()).toContain('in force')
    await expectAccessible(page)
    await shot(page, 'flow-02-instrument-registered')

    await openTab(page, 'API keys', /\/keys$/)
    await page.getByRole('form', { name: 'Issue a key' }).getByLabel('Name', { exact: true }).fill('Bench 5 PC')
    await page.getByRole('button', { name: 'Issue key' }).click()
    const secret = (await page.getByTestId('console-secret').textContent())!.trim()
    await shot(page, 'flow-03-key-issued')

    // The lab system posts a run of its reference gas, as `npm run lab:simulate` does.
    const runId = unique('ref-run')
    // Acquired now: the geometry registered above is valid from the moment it was registered.
    const body = referenceAcquisition(runId, new Date().toISOString(), slug)
    const posted = await postAcquisition(url('/').replace(/\/$/, ''), secret, body, runId)
    expect(posted.status).toBe(201)
    const species = (posted.body.result as { peaks: { assignment: { species: string } | null }[] }).peaks.map(p => p.assignment?.species)
    expect(species).toEqual(['N2', '[40Ar]', 'CO2', '[13C]O2'])

    await openTab(page, 'Acquisitions', /\/acquisitions$/)
    await page.getByRole('link', { name: runId }).click()
    await page.waitForURL(/\/acquisitions\/[0-9a-f-]{36}$/)
    await page.locator('.aw-chart canvas').first().waitFor()
    const peakTable = page.getByRole('table', { name: 'Picked peaks with their assignments' })
    await expect.poll(async () => (await peakTable.locator('tbody tr td:nth-child(4) > span:first-child').allTextContents()).map(t => t.trim())).toEqual(species)
    // Both resolving powers, labelled, and each peak number with its uncertainty.
    const headers = (await peakTable.locator('thead th').allTextContents()).map(t => t.trim())
    expect(headers).toEqual(expect.arrayContaining(['R, FWHM', 'R, 10 % valley', 'Height (± u)', 'FWHM (± u)']))
    const co2Row = peakTable.locator('tbody tr').nth(2)
    for (const column of [3, 6, 7, 8, 9, 10]) expect(await co2Row.locator(`td:nth-child(${column})`).textContent()).toMatch(/\d ± \d/)
    expect(await co2Row.locator('td:nth-child(4)').textContent()).toMatch(/neutral mass 43\.98\d+ ± /)
    expect(await page.getByRole('complementary', { name: 'Caution' }).textContent()).toContain('quality system')
    expect(await page.getByRole('region', { name: 'Isotope ratios and δ-values' }).textContent()).toContain('δ13C')
    await shot(page, 'flow-04-acquisition')
    // Zoom and pan change what the plot shows; "Whole range" brings it back.
    const whole = await chartPixels(page)
    await page.getByRole('button', { name: 'Zoom in' }).click()
    await page.getByRole('button', { name: 'Pan right' }).click()
    await expect.poll(async () => (await chartPixels(page)).equals(whole)).toBe(false)
    await page.getByRole('button', { name: 'Whole range' }).click()
    await expect.poll(async () => (await chartPixels(page)).equals(whole)).toBe(true)
    // The log axis lifts the minor peaks into view: the plot changes.
    await page.getByLabel('Log signal axis').check()
    await expect.poll(async () => (await chartPixels(page)).equals(whole)).toBe(false)
    // Redrawn whole, not a broken canvas (expectAccessible also fails on any page error).
    expect((await page.locator('.aw-chart canvas').first().boundingBox())!.height).toBeGreaterThan(300)
    await shot(page, 'flow-04b-log-axis')
    await expectAccessible(page)

    // Calibrate from this run: fit, look at the residuals, save.
    await page.getByRole('link', { name: 'Bench 5 sector' }).click()
    await page.waitForURL(/\/instruments\/[0-9a-f-]{36}$/)
    const reference = page.getByLabel('Reference acquisition', { exact: true })
    await reference.selectOption((await reference.locator('option', { hasText: runId }).getAttribute('value'))!)
    await page.getByRole('button', { name: 'Fit', exact: true }).click()
    await expect.poll(() => page.getByRole('heading', { name: /^Proposed: degree 1/ }).textContent()).toContain('at 4 peaks')
    await page.locator('.aw-chart canvas').first().waitFor()
    await shot(page, 'flow-05-calibration-proposed')
    await page.getByRole('button', { name: 'Save calibration' }).click()
    await expect.poll(() => page.getByRole('alert').first().textContent()).toContain('Calibration saved.')
    const calibrations = page.getByRole('region', { name: 'Calibrations' })
    expect(await calibrations.getByRole('row').nth(1).textContent()).toMatch(/^v1\s*in force\s*v1\s*1\s*4/)
    await expectAccessible(page)
    await shot(page, 'flow-06-calibrated')
  })

  it('uploads a CSV in the console with a progress bar and lands on the processed acquisition', async () => {
    const page = await signedInPage('lab_manager')
    const [{ id: labId }] = await testDb()<[{ id: string }]>`select id from labs where slug = 'saltmarsh-isotopes'`
    await page.goto(url(`/console/labs/${labId}/acquisitions`), { waitUntil: 'hydration' } as never)
    const ref = referenceAcquisition(unique('csv-run'), '2026-11-30T10:00:00Z', 'irms-north')
    const csv = ['# acceleratingVoltage: 3 kV ± 0.0006', '# formulas: CO2, [13C]O2, N2, [40Ar]', 'field [T],detector [fA]', ...ref.sweep.values.map((b, i) => `${b},${ref.detectors[0]!.values[i]}`)].join('\n')
    await page.getByLabel('Files', { exact: true }).setInputFiles({ name: 'reference.csv', mimeType: 'text/csv', buffer: Buffer.from(csv) })
    const form = page.getByRole('form', { name: 'Upload acquisition files' })
    await form.getByLabel('Instrument').selectOption('irms-north')
    await form.getByLabel('Run id').fill(ref.runId)
    await form.getByLabel('Acquired at').fill('2026-11-30T10:00')
    await page.getByRole('button', { name: 'Upload' }).click()
    await page.waitForURL(/\/acquisitions\/[0-9a-f-]{36}$/)
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe(ref.runId)
    await page.locator('.aw-chart canvas').first().waitFor()
    await shot(page, 'flow-07-uploaded')

    // A file the parser refuses shows why and stays on the form.
    await page.goto(url(`/console/labs/${labId}/acquisitions`), { waitUntil: 'hydration' } as never)
    await page.getByLabel('Files', { exact: true }).setInputFiles({ name: 'bad.csv', mimeType: 'text/csv', buffer: Buffer.from('field,detector [fA]\n0.4,1\n') })
    await page.getByRole('button', { name: 'Upload' }).click()
    await expect.poll(() => page.getByRole('form', { name: 'Upload acquisition files' }).textContent()).toContain('needs its unit in brackets')
    await expectAccessible(page)
  })

  it('refuses the lab pages to roles that must not see them', async () => {
    const [{ id: labId }] = await testDb()<[{ id: string }]>`select id from labs where slug = 'halvard-ridge'`
    const integrator = await signedInPage('integrator')
    for (const path of ['instruments', 'acquisitions']) {
      await integrator.goto(url(`/console/labs/${labId}/${path}`))
      await expect.poll(() => integrator.locator('body').textContent()).toContain('Not allowed')
    }
    // The demo lab manager runs Saltmarsh: another lab is not there for them.
    const manager = await signedInPage('lab_manager')
    await manager.goto(url(`/console/labs/${labId}/acquisitions`))
    await expect.poll(() => manager.locator('body').textContent()).toMatch(/No such lab|not found/i)
  })
})
