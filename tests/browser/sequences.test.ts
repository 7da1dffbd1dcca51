import { url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { beforeAll, describe, expect, it } from 'vitest'
import { DEMO_SEQUENCE_COUNT, DEMO_SPOILED_SEQUENCE, demoCo2Sequences, postDemoSequences } from '../../scripts/lib/demo-sequences'
import { expectAccessible, shot, signedInPage } from '../support/browser'
import { demoUser } from '../support/demo'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

await useArcwise({ browser: true })

// The demo's isotope history, posted through the API as `npm start` posts it: thirty CO2
// sequences on the Saltmarsh bench over four months, one of them with a spoiled marble aliquot.
const now = Date.now()
let labId = ''
beforeAll(async () => {
  const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
  const labs = (await admin.get<{ items: { id: string, slug: string }[] }>('/api/console/labs')).body.items
  labId = labs.find(l => l.slug === 'saltmarsh-isotopes')!.id
  const key = (await admin.post<{ secret: string }>(`/api/console/labs/${labId}/keys`, { name: 'Sequence history (test)', scopes: ['acquisitions:write', 'results:read'] })).body
  expect(await postDemoSequences(url('/').replace(/\/$/, ''), key.secret, now)).toBe(DEMO_SEQUENCE_COUNT)
})

const region = (page: Page, name: string) => page.getByRole('region', { name })

describe('isotope sequences in the console', () => {
  it('a sequence shows its standards against their accepted values, the normalisation line with residuals, the drift and the steps with their sources', async () => {
    const page = await signedInPage('lab_manager')
    await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Sequences' }).click()
    await page.waitForURL(/\/sequences$/)
    await expect.poll(() => page.getByRole('main').getByRole('link', { name: /^SM-\d{4}-\d{2}-\d{2}-CO2$/ }).count()).toBe(DEMO_SEQUENCE_COUNT)
    await expect.poll(() => page.getByRole('complementary', { name: 'Caution' }).textContent()).toMatch(/calibration and method each lab registers.*quality system/)
    await expectAccessible(page)
    await shot(page, 'sequences-01-list')

    const newest = demoCo2Sequences(now).at(-1)!.id
    await page.getByRole('link', { name: newest }).click()
    await page.waitForURL(/\/sequences\/[0-9a-f-]{36}$/)
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe(`Sequence ${newest}`)

    // Each standard beside its accepted value: the anchors and the lab's monitoring marble.
    const standards = page.getByRole('table', { name: 'Standards against their accepted values' })
    const rowOf = (name: string) => standards.getByRole('row').filter({ hasText: name })
    await expect.poll(() => rowOf('IAEA-603').first().textContent()).toContain('2.460')
    expect(await rowOf('IAEA-603').first().textContent()).toContain('anchor')
    expect(await rowOf('LSVEC').first().textContent()).toContain('−46.479')
    const marble = await rowOf('Saltmarsh marble').first().textContent()
    expect(marble).toContain('1.620')
    expect(marble).toContain('check')

    // The normalisation line with its figures and two plots (line and residuals).
    const normalisation = region(page, 'Normalisation')
    expect(await normalisation.textContent()).toContain('δ13C onto VPDB')
    expect(await normalisation.textContent()).toMatch(/RMS residual/)
    await expect.poll(() => normalisation.locator('.aw-chart canvas').count()).toBeGreaterThanOrEqual(2)
    const lineLabel = await normalisation.getByRole('img').first().getAttribute('aria-label')
    expect(lineLabel).toContain('2 anchor standards (IAEA-603, LSVEC)')
    expect(lineLabel).toContain('4 samples on the line')
    // Which samples the anchors carried onto the scale (positions 8, 10, 12 and 14 of the layout).
    expect(await normalisation.getByRole('table', { name: 'Anchors of the δ13C normalisation and the samples they anchored' }).textContent()).toContain('8, 10, 12, 14')

    const drift = region(page, 'Drift')
    expect(await drift.textContent()).toContain('linear in time, from IAEA-603')
    await expect.poll(() => drift.locator('.aw-chart canvas').count()).toBeGreaterThanOrEqual(1)

    // The steps in the order they ran, each with its source and parameters.
    const steps = page.getByRole('list', { name: 'Steps applied, in order' }).getByRole('listitem')
    await expect.poll(() => steps.count()).toBeGreaterThanOrEqual(4)
    const stepTexts = await steps.allTextContents()
    expect(stepTexts.findIndex(t => t.includes('17O correction'))).toBeLessThan(stepTexts.findIndex(t => t.includes('Normalisation to the international scale')))
    expect(stepTexts.find(t => t.includes('17O correction'))).toMatch(/Source: .*Brand/)
    await expectAccessible(page)
    await shot(page, 'sequences-02-sequence')
  })

  it('the overview leads to the control chart, which marks and lists the one rule violation, and its sequence is flagged', async () => {
    const page = await signedInPage('lab_manager')
    const spoiled = demoCo2Sequences(now)[DEMO_SPOILED_SEQUENCE]!.id
    const attention = region(page, 'Isotope quality control')
    await expect.poll(() => attention.textContent()).toContain('Control-chart rule 1-3s violated')
    expect(await attention.getByRole('link').filter({ hasText: 'rule' }).count()).toBe(1)
    await attention.getByRole('link', { name: /1-3s/ }).click()
    await page.waitForURL(/\/control-charts\/[0-9a-f-]{36}\?/)
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toBe('Saltmarsh marble δ13C')

    // The plot: measured against accepted with the ±2s/±3s lines, the violating point in the alarm series.
    const plot = region(page, 'Measured against accepted, with ±2s and ±3s')
    await expect.poll(() => plot.locator('.aw-chart canvas').count()).toBe(2)
    const label = await plot.getByRole('img').first().getAttribute('aria-label')
    expect(label).toContain(`${DEMO_SEQUENCE_COUNT} sequences`)
    expect(label).toContain('1 rule violations (1-3s on')
    expect(await plot.textContent()).toContain('rule violated')

    // Listed: one row, the rule and the sequence it came from.
    const list = region(page, 'Rule violations').getByRole('table')
    const rows = list.getByRole('row')
    await expect.poll(() => rows.count()).toBe(2)
    expect(await rows.nth(1).textContent()).toContain('1-3s')
    expect(await rows.nth(1).textContent()).toContain(spoiled)
    await expectAccessible(page)
    await shot(page, 'sequences-03-control-chart')

    // Every other chart of the lab is in control.
    await page.getByRole('link', { name: 'All charts' }).click()
    await page.waitForURL(/\/control-charts$/)
    const charts = page.getByRole('main').getByRole('table').getByRole('row')
    await expect.poll(() => charts.count()).toBeGreaterThanOrEqual(4)
    expect(await charts.filter({ hasText: 'violated' }).count()).toBe(1)
    // Across every chart of the history, δ13C and δ18O of each standard, exactly one point breaks a rule.
    const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
    const all = (await admin.get<{ items: { material: string, quantity: string, points: number, violations: number }[] }>(`/api/console/labs/${labId}/control-charts`)).body.items
    expect(all.map(c => `${c.material} ${c.quantity}`).sort()).toEqual(['IAEA-603 δ13C', 'IAEA-603 δ18O', 'LSVEC δ13C', 'LSVEC δ18O', 'SM-MARBLE δ13C', 'SM-MARBLE δ18O'])
    expect(all.every(c => c.points >= DEMO_SEQUENCE_COUNT)).toBe(true)
    expect(all.reduce((n, c) => n + c.violations, 0)).toBe(1)

    await page.goto(url(`/console/labs/${labId}/control-charts`), { waitUntil: 'hydration' })
    await page.getByRole('link', { name: 'Sequences', exact: true }).first().click()
    await page.waitForURL(/\/sequences$/)
    const flaggedRow = page.getByRole('row').filter({ hasText: spoiled })
    await expect.poll(() => flaggedRow.textContent()).toContain('1 rule violation')
  })

  it('the acquisitions list reads older pages with "Show older", and a changed order starts again from the newest', async () => {
    // Thirty sequences of about sixteen runs each: many more than one page (50) of acquisitions.
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${labId}/acquisitions`), { waitUntil: 'hydration' })
    const runs = page.getByRole('main').getByRole('table').getByRole('row').locator('td:first-child')
    await expect.poll(() => runs.count()).toBe(50)
    const firstPage = await runs.allTextContents()
    await page.getByRole('button', { name: 'Show older' }).click()
    await expect.poll(() => runs.count()).toBe(100)
    const twoPages = await runs.allTextContents()
    // The older page follows the first: the first page unchanged, no run listed twice.
    expect(twoPages.slice(0, 50)).toEqual(firstPage)
    expect(new Set(twoPages).size).toBe(100)

    // A new order is a new list: the older page read before it is dropped.
    await page.getByLabel('Order', { exact: true }).selectOption('acquired')
    await expect.poll(() => runs.count()).toBe(50)
    await page.getByRole('button', { name: 'Show older' }).click()
    await expect.poll(() => runs.count()).toBe(100)
    expect(new Set(await runs.allTextContents()).size).toBe(100)
  })

  it('a method with an unknown anchor shows the problem next to that field and stores nothing; the corrected one is saved', async () => {
    const page = await signedInPage('lab_manager')
    await page.goto(url(`/console/labs/${labId}/methods`), { waitUntil: 'hydration' })
    const sql = testDb()
    const count = async () => (await sql<{ n: number }[]>`select count(*)::int as n from methods m join instruments i on i.id = m.instrument_id where i.slug = 'irms-north' and i.lab_id = ${labId}`)[0]!.n
    const before = await count()
    expect(before).toBeGreaterThanOrEqual(1)
    await expect.poll(() => page.getByRole('table', { name: 'Method versions of North bench IRMS' }).textContent()).toContain('normalise(IAEA-603, LSVEC)')

    await page.getByText('Create a new version for North bench IRMS').click()
    const form = page.getByRole('form', { name: 'New method version' })
    await form.getByLabel('Name', { exact: true }).fill('Carbonate CO2 with a third anchor')
    const anchors = form.getByLabel('Anchor standards (comma-separated)')
    await anchors.fill('IAEA-603, LSVEC, NBS-19X')
    await form.getByRole('button', { name: 'Save as a new version' }).click()
    // The server's problem lands on the anchors field it names, described by it for screen readers.
    await expect.poll(() => anchors.getAttribute('aria-invalid')).toBe('true')
    const describedBy = await anchors.getAttribute('aria-describedby')
    await expect.poll(() => page.locator(`[id="${describedBy}"]`).textContent()).toContain('no reference material or working standard "NBS-19X"')
    expect(await count()).toBe(before)
    await expectAccessible(page)
    await shot(page, 'sequences-04-method-problem')

    // Emptied, the same schema as the server's refuses it in the browser, on the same field.
    await anchors.fill('')
    await form.getByRole('button', { name: 'Save as a new version' }).click()
    await expect.poll(() => page.locator(`[id="${describedBy}"]`).textContent()).toContain('needs at least one anchor standard')
    expect(await count()).toBe(before)

    await anchors.fill('IAEA-603, LSVEC, NBS19')
    await form.getByRole('button', { name: 'Save as a new version' }).click()
    await expect.poll(() => page.getByRole('alert').filter({ hasText: 'New method version saved' }).count()).toBe(1)
    expect(await count()).toBe(before + 1)
    // The list is fetched again after the save: wait for it rather than read it at once.
    await expect.poll(() => page.getByRole('table', { name: 'Method versions of North bench IRMS' }).textContent()).toContain('normalise(IAEA-603, LSVEC, NBS19)')
  })
})
