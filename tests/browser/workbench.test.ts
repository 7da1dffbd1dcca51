import { url } from '@nuxt/test-utils/e2e'
import type { Page } from 'playwright-core'
import { beforeAll, describe, expect, it } from 'vitest'
import { darkTheme, expectAccessible, shot, signedInPage } from '../support/browser'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument, sectorGeometry } from '../support/lab'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'
import { insertPausedEndpoint } from '../support/webhooks'

await useArcwise({ browser: true })

// Issue 21, points 2 and 7: one search box and a Ctrl-K palette scoped by role, lists that
// keep their filters in the URL, and the audit log in sentences, filtered and exported.

const tok = unique('wb').toLowerCase()
const ids = { saltmarsh: '', northgate: '', ownRun: '', otherRun: '', delivery: '' }

async function post(secret: string, body: unknown) {
  const res = await fetch(url('/api/v1/acquisitions'), { method: 'POST', headers: { 'content-type': 'application/json', ...bearer(secret) }, body: JSON.stringify(body) })
  expect(res.status).toBe(201)
  return ((await res.json()) as { id: string }).id
}

beforeAll(async () => {
  const sql = testDb()
  const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
  ids.saltmarsh = (await sql<{ id: string }[]>`select id from labs where slug = 'saltmarsh-isotopes'`)[0]!.id
  ids.northgate = (await sql<{ id: string }[]>`select id from partners where slug = 'northgate-water'`)[0]!.id
  const slug = unique('wbi').toLowerCase()
  await admin.post(`/api/console/labs/${ids.saltmarsh}/instruments`, { slug, name: 'Workbench sector', geometry: sectorGeometry, validFrom: '2026-01-01T00:00:00Z' })
  const key = (await admin.post(`/api/console/labs/${ids.saltmarsh}/keys`, { name: `workbench ${tok}`, scopes: ['acquisitions:write'] })).body
  ids.ownRun = await post(key.secret, { ...co2Acquisition(`${tok}-own`, 1000), instrument: slug, sampleRef: `${tok}-core` })
  const other = await labWithInstrument()
  ids.otherRun = await post(other.key.secret, co2Acquisition(`${tok}-other`, 1000))
  const endpointId = await insertPausedEndpoint(ids.northgate, `https://hooks.example.org/${tok}`)
  const [d] = await sql<{ id: string }[]>`insert into deliveries (endpoint_id, event_type, test_payload, status, attempts, finished_at) values (${endpointId}, 'webhook.test', ${sql.json({ test: true })}, 'succeeded', 1, now()) returning id`
  ids.delivery = d!.id
})

const palette = (page: Page) => page.getByRole('dialog', { name: 'Search' })
async function openPaletteAndType(page: Page, text: string) {
  // The shortcut is heard once the console layout has mounted (its search button is there).
  await page.getByRole('button', { name: /Search runs, samples/ }).waitFor()
  await expect.poll(async () => {
    if (!await palette(page).isVisible()) await page.keyboard.press('Control+k')
    return palette(page).isVisible()
  }).toBe(true)
  const box = palette(page).getByRole('combobox')
  await expect.poll(() => page.evaluate(() => document.activeElement?.id)).toBe('aw-search-input')
  await box.fill(text)
}

describe('search everywhere', () => {
  it('a lab manager opens the palette with Ctrl-K, finds a run of their lab by id and opens it; another lab\'s run is not found', async () => {
    const page = await signedInPage('lab_manager')
    await openPaletteAndType(page, `${tok}-o`)
    const options = palette(page).getByRole('option')
    await expect.poll(() => options.allTextContents()).toEqual([expect.stringContaining(`${tok}-own`)])
    await expectAccessible(page)
    await shot(page, 'search-palette-lab-manager')
    await page.keyboard.press('Enter')
    await page.waitForURL(u => u.pathname === `/console/labs/${ids.saltmarsh}/acquisitions/${ids.ownRun}`)
    await expect.poll(() => page.getByRole('heading', { level: 1 }).textContent()).toContain(`${tok}-own`)

    await openPaletteAndType(page, `${tok}-other`)
    await expect.poll(() => palette(page).getByRole('status').textContent()).toContain('Nothing you may see matches')
    expect(await palette(page).getByRole('option').count()).toBe(0)
    await page.keyboard.press('Escape')
    await expect.poll(() => palette(page).isVisible()).toBe(false)
  })

  it('an admin finds a sample with the header box and the arrow keys, in the dark theme too', async () => {
    const page = await signedInPage('admin')
    await darkTheme(page)
    await page.getByRole('button', { name: /Search runs, samples/ }).click()
    await palette(page).getByRole('combobox').fill(tok)
    // The own run (by id and by sample) and the other lab's run: an admin reads every lab.
    await expect.poll(async () => (await palette(page).getByRole('option').allTextContents()).length).toBeGreaterThanOrEqual(3)
    const texts = await palette(page).getByRole('option').allTextContents()
    expect(texts.some(t => t.includes(`${tok}-other`))).toBe(true)
    const sampleIndex = texts.findIndex(t => t.startsWith('Sample'))
    for (let i = 0; i < sampleIndex; i++) await page.keyboard.press('ArrowDown')
    await expect.poll(() => palette(page).getByRole('option', { selected: true }).textContent()).toContain(`${tok}-core`)
    await expectAccessible(page)
    await shot(page, 'search-palette-admin-dark')
    await page.keyboard.press('Enter')
    await page.waitForURL(u => u.pathname.endsWith(`/acquisitions/${ids.ownRun}`))
  })

  it('an integrator finds a webhook message by its webhook-id', async () => {
    const page = await signedInPage('integrator')
    await openPaletteAndType(page, ids.delivery.slice(0, 13))
    await expect.poll(() => palette(page).getByRole('option').allTextContents()).toEqual([expect.stringContaining(ids.delivery)])
    await shot(page, 'search-palette-integrator-webhook-id')
    await page.keyboard.press('Enter')
    await page.waitForURL(u => u.pathname === `/console/partners/${ids.northgate}/deliveries/${ids.delivery}`)
  })

  it('the console\'s first tab stop skips to the content', async () => {
    const page = await signedInPage('viewer')
    await page.goto(url('/console'), { waitUntil: 'hydration' })
    await page.keyboard.press('Tab')
    const focused = page.locator(':focus')
    await expect.poll(() => focused.textContent()).toBe('Skip to content')
    await page.keyboard.press('Enter')
    await expect.poll(() => page.evaluate(() => document.activeElement?.id)).toBe('main')
  })
})

describe('lists keep their filters in the URL', () => {
  it('deliveries: a filtered list survives a reload and can be linked to, at phone width too', async () => {
    const page = await signedInPage('integrator')
    await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Deliveries' }).click()
    await page.waitForURL(/\/deliveries$/)
    await page.getByLabel('State').selectOption('succeeded')
    await page.getByLabel('Event type').selectOption('webhook.test')
    await page.getByRole('button', { name: 'Filter' }).click()
    await page.waitForURL(u => u.searchParams.get('status') === 'succeeded' && u.searchParams.get('eventType') === 'webhook.test')
    await page.reload()
    await page.waitForFunction(() => (window as unknown as { useNuxtApp?: () => { isHydrating: boolean } }).useNuxtApp?.().isHydrating === false)
    expect(await page.getByLabel('State').inputValue()).toBe('succeeded')
    expect(await page.getByLabel('Event type').inputValue()).toBe('webhook.test')
    await expect.poll(() => page.getByRole('main').textContent()).toContain(`hooks.example.org/${tok}`)
    await page.setViewportSize({ width: 390, height: 844 })
    await expectAccessible(page)
    await shot(page, 'deliveries-filtered-phone')
  })

  it('users: the search\'s link to a person opens the list filtered to them', async () => {
    const page = await signedInPage('admin')
    await openPaletteAndType(page, 'Ines Varga')
    await expect.poll(() => palette(page).getByRole('option').allTextContents()).toEqual([expect.stringContaining('manager@saltmarsh.example')])
    await page.keyboard.press('Enter')
    await page.waitForURL(u => u.pathname === '/console/users' && u.searchParams.get('q') === 'manager@saltmarsh.example')
    await expect.poll(() => page.getByRole('table').first().getByRole('row').count()).toBe(2)
    await expectAccessible(page)
  })
})

describe('the audit log', () => {
  it('reads in sentences with names, filters through the URL and exports what it shows as CSV', async () => {
    const page = await signedInPage('admin')
    await page.goto(url('/console/audit'), { waitUntil: 'hydration' })
    await expect.poll(() => page.getByRole('main').textContent()).toContain(`Morgan Ashdown issued the API key "workbench ${tok}" for Saltmarsh Stable Isotope Lab`)
    await expectAccessible(page)
    await shot(page, 'audit-sentences')

    await page.getByLabel('Action').selectOption('key.issued')
    await page.getByLabel('Who (name or e-mail contains)').fill('Morgan')
    await page.getByRole('button', { name: 'Apply filters' }).click()
    await page.waitForURL(u => u.searchParams.get('action') === 'key.issued' && u.searchParams.get('actor') === 'Morgan')
    await page.reload()
    await page.waitForFunction(() => (window as unknown as { useNuxtApp?: () => { isHydrating: boolean } }).useNuxtApp?.().isHydrating === false)
    expect(await page.getByLabel('Action').inputValue()).toBe('key.issued')
    const actions = await page.getByRole('table').locator('tbody tr td:nth-child(4)').allTextContents()
    expect(actions.length).toBeGreaterThan(0)
    expect(new Set(actions.map(a => a.trim()))).toEqual(new Set(['key.issued']))

    const href = await page.getByRole('link', { name: 'Export CSV' }).getAttribute('href')
    expect(href).toContain('action=key.issued')
    const csv = await (await page.request.get(url(href!))).text()
    expect(csv.split('\n')[0]).toBe('at,actor,actor_login,action,sentence,target_type,target_id,target,ip,detail')
    expect(csv).toContain(`issued the API key ""workbench ${tok}""`)
    expect(csv).not.toContain('sign-in,')

    await darkTheme(page)
    await expectAccessible(page)
    await shot(page, 'audit-filtered-dark')
  })
})

describe('an instrument\'s history (point 5)', () => {
  it('geometry and calibration on one timeline by validity, the versions in force marked, with what each applies to', async () => {
    const sql = testDb()
    const noble = (await sql<{ id: string, lab: string }[]>`select id, lab_id as lab from instruments where slug = 'noble-gas-1'`)[0]!
    const irms = (await sql<{ id: string, lab: string }[]>`select id, lab_id as lab from instruments where slug = 'irms-north'`)[0]!
    const page = await signedInPage('admin')
    await page.goto(url(`/console/labs/${noble.lab}/instruments/${noble.id}`), { waitUntil: 'hydration' })
    const history = page.getByRole('region', { name: 'History', exact: true })
    const items = history.getByRole('listitem')
    // The demo re-measured the radius five days ago: v2 in force above v1, whose span ends then.
    await expect.poll(() => items.count()).toBe(2)
    expect(await items.nth(0).textContent()).toMatch(/Geometry v2\s*in force.*acquired from .* on\./)
    expect(await items.nth(1).textContent()).toMatch(/Geometry v1.*acquired from .* until /)
    expect(await items.nth(1).textContent()).not.toContain('in force')
    await expectAccessible(page)
    await shot(page, 'instrument-history')

    await page.goto(url(`/console/labs/${irms.lab}/instruments/${irms.id}`), { waitUntil: 'hydration' })
    await expect.poll(() => page.getByRole('region', { name: 'History', exact: true }).getByRole('listitem').first().textContent()).toMatch(/Calibration v1\s*in force.*Corrects m\/z \(with geometry v1\)/)
    expect(await page.getByRole('region', { name: 'Calibrations', exact: true }).textContent()).toContain('in force')
    await darkTheme(page)
    await expectAccessible(page)
    await shot(page, 'instrument-history-dark')
  })
})
