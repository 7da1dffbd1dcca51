import { createPage, url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInThroughForm } from '../support/browser'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, sectorGeometry } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

// Reprocessing in the console (issue 20, point 2): from a back-dated calibration on the
// instrument page to the job with its progress, the diff of the versions, and the release.
await useArcwise({ browser: true })

describe('reprocessing in the console', () => {
  it('a lab manager reprocesses the results a back-dated calibration affects, sees the job finish, compares the versions and releases a correction', async () => {
    const { email, password } = demoUser('lab_manager')
    const api = await new ConsoleClient().signIn(email, password)
    const labId = (await api.get('/api/console/me')).body.labId as string
    const slug = unique('rp').toLowerCase()
    const instrument = (await api.post(`/api/console/labs/${labId}/instruments`, { slug, name: `Reprocess bench ${slug}`, geometry: sectorGeometry, validFrom: '2026-01-01T00:00:00Z' })).body
    const key = (await api.post(`/api/console/labs/${labId}/keys`, { name: 'Reprocess PC', scopes: ['acquisitions:write'] })).body
    const runs: string[] = []
    for (let i = 0; i < 2; i++) {
      const runId = unique('rp-run')
      const posted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', { ...co2Acquisition(runId, 1000), instrument: slug, acquiredAt: new Date(Date.UTC(2026, 10, 30, 9 + i)).toISOString() }, bearer(key.secret))
      expect(posted.status).toBe(201)
      runs.push(runId)
    }
    // Entered late: valid from before both acquisitions, reading every m/z 30 ppm high.
    const calibration = await api.post(`/api/console/labs/${labId}/instruments/${instrument.id}/calibrations`, {
      degree: 1, validFrom: '2026-11-01T00:00:00Z', points: [28, 40, 44, 46].map(m => ({ measuredMz: m, referenceMz: m * (1 + 30e-6) })),
    })
    expect(calibration.status).toBe(201)

    const page = await createPage('/sign-in')
    await signInThroughForm(page, email, password)
    await page.goto(url(`/console/labs/${labId}/instruments/${instrument.id}`), { waitUntil: 'hydration' } as never)
    const calibrations = page.getByRole('region', { name: 'Calibrations' })
    await calibrations.getByRole('link', { name: 'Reprocess the results this affects (calibration v1)' }).click()
    await page.waitForURL(/\/reprocess-jobs\?/)
    const form = page.getByRole('form', { name: 'Start a reprocessing job' })
    await expect.poll(() => form.getByLabel('Instrument').inputValue()).toBe(instrument.id)
    expect(await form.getByLabel('Reason').inputValue()).toContain('calibration v1')
    expect(await form.getByLabel('Acquired from (optional)').inputValue()).toMatch(/^2026-1[01]-/)
    await expectAccessible(page)
    await shot(page, 'reprocess-01-form')

    // A reason is required, named on its field; nothing starts.
    await form.getByLabel('Reason').fill('')
    await form.getByRole('button', { name: 'Start reprocessing' }).click()
    await expect.poll(() => form.textContent()).toContain('say why these results are reprocessed')
    await form.getByLabel('Reason').fill('Calibration of 1 November entered late')
    await form.getByRole('button', { name: 'Start reprocessing' }).click()
    await page.waitForURL(/\/reprocess-jobs\/[0-9a-f-]{36}$/)
    // Progress is polled: the page shows the job done without a reload.
    await expect.poll(() => page.getByRole('main').textContent(), { timeout: 30_000 }).toContain('2 / 2 · 2 changed')
    const changed = page.getByRole('region', { name: 'Results that changed' })
    await expect.poll(() => changed.getByRole('row').count()).toBe(3)
    expect(await changed.textContent()).toContain('v1 → v2')
    await expectAccessible(page)
    await shot(page, 'reprocess-02-job-done')

    await changed.getByRole('link', { name: runs[0]! }).click()
    await page.waitForURL(/\/acquisitions\/[0-9a-f-]{36}#versions$/)
    const versions = page.getByRole('region', { name: 'Result versions' }).getByRole('table', { name: 'Versions of this acquisition\'s result, oldest first' })
    await expect.poll(() => versions.getByRole('row').count()).toBe(3)
    expect(await versions.textContent()).toMatch(/v1.*v2/)
    const diff = page.getByTestId('version-diff')
    await expect.poll(() => diff.textContent()).toContain('What changed from v1 to v2')
    expect(await diff.textContent()).toContain('+30.00 ppm')
    expect(await diff.textContent()).toContain('Calibration: none → v1')
    expect(await diff.textContent()).toMatch(/Flags removed.*uncalibrated/)
    await expectAccessible(page)
    await shot(page, 'reprocess-03-diff')

    await page.goBack()
    await page.waitForURL(/\/reprocess-jobs\/[0-9a-f-]{36}$/)
    // The demo stable-isotope lab reviews with four eyes: whoever started the reprocessing
    // cannot release what it produced, and the page says why; nothing is released.
    await changed.getByRole('button', { name: `Release correction of ${runs[0]}` }).click()
    await expect.poll(() => page.getByRole('main').textContent()).toContain('another reviewer must release it')
    expect(await changed.getByRole('row').filter({ hasText: runs[0] }).textContent()).toContain('held')

    // The lab's reviewer releases it from the same job page.
    const jobUrl = page.url()
    const reviewer = await createPage('/sign-in')
    await signInThroughForm(reviewer, demoUser('lab_reviewer').email, demoUser('lab_reviewer').password)
    await reviewer.goto(jobUrl, { waitUntil: 'hydration' } as never)
    const changedForReviewer = reviewer.getByRole('region', { name: 'Results that changed' })
    await changedForReviewer.getByRole('button', { name: `Release correction of ${runs[0]}` }).click()
    await expect.poll(() => reviewer.getByRole('main').textContent()).toContain('Correction released')
    await expect.poll(() => changedForReviewer.getByRole('row').filter({ hasText: runs[0] }).textContent()).toContain('released')
    await expectAccessible(reviewer)
    await shot(reviewer, 'reprocess-04-released')
  })
})
