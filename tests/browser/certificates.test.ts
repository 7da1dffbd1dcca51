import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { createRequire } from 'node:module'
import { createPage, url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs, signInThroughForm } from '../support/browser'
import { demoUser } from '../support/demo'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, testDb, useArcwise } from '../support/server'

// The console's "Verify a certificate" page and the certificate downloads on an acquisition
// (issue 20, point 4). The result is released in SQL, as a reviewer's approval leaves it,
// until the review service lands.

await useArcwise({ browser: true })

const axeSource = readFileSync(createRequire(import.meta.url).resolve('axe-core/axe.min.js'), 'utf8')
/** Every axe violation of any impact on the page (the brief: none at all). */
async function allViolations(page: Awaited<ReturnType<typeof createPage>>) {
  await page.evaluate(axeSource)
  return page.evaluate(async () => {
    const result = await (window as unknown as { axe: { run: () => Promise<{ violations: { id: string, nodes: { target: string[] }[] }[] }> } }).axe.run()
    return result.violations.map(v => `${v.id}: ${v.nodes.map(n => n.target.join(' ')).join(', ')}`)
  })
}

describe('verifying a certificate in the console', () => {
  it('a signed-in person drops the .json and .jws and reads the verdict; a changed byte is not valid; the acquisition page downloads the PDF', async () => {
    const { lab, key, sql } = await labWithInstrument()
    const posted = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(), bearer(key.secret))
    const id = posted.body.id as string
    await sql`update results set review_state = 'released', released_at = now() where acquisition_id = ${id}`
    const get = async (ext: string) => (await fetch(url(`/api/v1/results/${id}/certificate.${ext}`), { headers: bearer(key.secret) })).text()
    const canonical = await get('json')
    const jws = await get('jws')
    const number = JSON.parse(canonical).certificate.number as string
    const dir = mkdtempSync(join(tmpdir(), 'aw-cert-'))
    writeFileSync(join(dir, `${number}.json`), canonical)
    writeFileSync(join(dir, `${number}.jws`), jws)

    const page = await createPage('/sign-in')
    await signInAs(page, 'viewer')
    await page.getByRole('navigation', { name: 'Console' }).getByRole('link', { name: 'Verify a certificate' }).click()
    await page.waitForURL(/\/console\/certificates\/verify$/)
    await page.locator('#certificate-files').setInputFiles([join(dir, `${number}.json`), join(dir, `${number}.jws`)])
    await expect.poll(() => page.getByLabel('Signed JSON, exactly as issued').inputValue()).toBe(canonical)
    await page.getByRole('button', { name: 'Verify', exact: true }).click()
    const verdict = page.getByRole('status')
    await expect.poll(() => verdict.getByRole('heading').textContent()).toBe('Valid')
    const text = await verdict.textContent()
    expect(text).toContain(number)
    expect(text).toContain(JSON.parse(canonical).acquisition.runId)
    expect(text).toContain('Still released')
    expect(text).toMatch(/δ13C \(VPDB\) = /)
    await expectAccessible(page)
    expect(await allViolations(page)).toEqual([])
    await shot(page, 'certificate-valid')

    // The JSON changed (calibrated false → true): the signature no longer matches.
    await page.getByLabel('Signed JSON, exactly as issued').fill(canonical.replace('"calibrated":false', '"calibrated":true'))
    await page.getByRole('button', { name: 'Verify', exact: true }).click()
    await expect.poll(() => page.getByRole('status').getByRole('heading').textContent()).toBe('Not valid')
    expect(await page.getByRole('status').textContent()).toContain('does not match these bytes')
    expect(await allViolations(page)).toEqual([])
    await shot(page, 'certificate-not-valid')

    // The JWS missing: the field says so, nothing is sent.
    await page.getByLabel('Detached JWS').fill('')
    await page.getByRole('button', { name: 'Verify', exact: true }).click()
    await expect.poll(() => page.getByText(/^is required/).count()).toBeGreaterThan(0)
    expect(await allViolations(page)).toEqual([])

    // The lab's page of the acquisition offers the PDF (admin: may read every lab).
    const admin = await createPage('/sign-in')
    await signInThroughForm(admin, demoUser('admin').email, demoUser('admin').password)
    await admin.goto(url(`/console/labs/${lab.id}/acquisitions/${id}`), { waitUntil: 'hydration' } as never)
    const download = admin.waitForEvent('download')
    await admin.getByRole('button', { name: 'Certificate (PDF)' }).click()
    expect((await download).suggestedFilename()).toBe(`${number}.pdf`)
    expect(await testDb()`select count(*)::int as n from certificates where number = ${number}`).toEqual([{ n: 1 }])
  })
})
