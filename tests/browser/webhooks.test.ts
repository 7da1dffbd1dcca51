import { createPage, url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { expectAccessible, shot, signInAs } from '../support/browser'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'
import { grantedPartnerWithEndpoint, recordingSink, until } from '../support/webhooks'

// The webhook screens, driven as their users would: an integrator adds an endpoint and sees
// deliveries arrive; an admin finds a dead delivery and replays it.

const SINK_PORT = 4193
await useArcwise({ browser: true, env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_RETRY_SCHEDULE: '1', NUXT_WEBHOOKS_POLL_MS: '200' } })

const failing = new Set<string>()
const hits = await recordingSink(SINK_PORT, path => failing.has(path) ? 500 : 200)

describe('webhooks in the console', () => {
  it('an integrator adds an endpoint, keeps its secret, sees the delivery arrive and checks its signature', async () => {
    // A lab that grants the integrator's partner (the demo's Northgate Water Authority).
    // A name of its own: other tests' labs called "Test Lab" may grant the same partner.
    const { admin, lab, key } = await labWithInstrument({ name: `Webhook Lab ${unique('w')}` })
    const northgate = (await admin.get('/api/console/partners')).body.items.find((p: { slug: string }) => p.slug === 'northgate-water')
    await admin.post(`/api/console/labs/${lab.id}/grants`, { partnerId: northgate.id })
    const page = await createPage('/sign-in')
    await signInAs(page, 'integrator')
    await page.getByRole('link', { name: 'Webhooks' }).click()
    await page.waitForURL(/\/webhooks$/)
    await expectAccessible(page)
    const path = `/hook-${unique('int')}`
    await page.getByLabel('Endpoint URL').fill(`http://127.0.0.1:${SINK_PORT}${path}`)
    await page.getByLabel('Description').fill('Our LIMS intake')
    await page.getByRole('checkbox', { name: lab.name }).check()
    await page.getByRole('button', { name: 'Add endpoint' }).click()
    const secret = (await page.getByTestId('console-secret').textContent())!
    expect(secret).toMatch(/^whsec_/)
    await shot(page, 'webhooks-endpoint-added')
    await page.getByRole('button', { name: 'Done' }).click()

    // Edit it in place (the demo partner has other tests' endpoints too: this one by its URL).
    const mine = page.getByRole('listitem', { name: `Endpoint http://127.0.0.1:${SINK_PORT}${path}` })
    await mine.getByRole('button', { name: 'Edit', exact: true }).click()
    await page.getByRole('form', { name: 'Edit the endpoint' }).getByLabel('Description').fill('LIMS intake, night shift')
    await page.getByRole('button', { name: 'Save endpoint' }).click()
    await expect.poll(() => mine.textContent()).toContain('LIMS intake, night shift')

    // Its delivery limits (issue 22): past the hub's bound the field says so; within it they are kept.
    await mine.getByRole('button', { name: 'Edit', exact: true }).click()
    const edit = page.getByRole('form', { name: 'Edit the endpoint' })
    await edit.getByLabel('Sends in flight at most').fill('100')
    await page.getByRole('button', { name: 'Save endpoint' }).click()
    await expect.poll(() => edit.textContent()).toContain('may be at most 64 on this hub')
    await edit.getByLabel('Sends in flight at most').fill('8')
    await edit.getByLabel('Deliver in order').check()
    await shot(page, 'webhooks-endpoint-limits')
    await page.getByRole('button', { name: 'Save endpoint' }).click()
    await expect.poll(() => mine.textContent()).toContain('8 in flight, in order')

    // A bad URL is refused on the field it names: a private address, and a host name that
    // resolves to loopback (looked up when the endpoint is saved).
    await page.getByLabel('Endpoint URL').fill('http://10.0.0.5/hook')
    await page.getByRole('button', { name: 'Add endpoint' }).click()
    await expect.poll(() => page.getByRole('alert').last().textContent()).toContain('private')
    await page.getByLabel('Endpoint URL').fill('https://localhost/hook')
    await page.getByRole('button', { name: 'Add endpoint' }).click()
    await expect.poll(() => page.getByRole('alert').last().textContent()).toContain('localhost resolves to 127.0.0.1')

    expect((await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 1500), bearer(key.secret))).status).toBe(201)
    const hit = await until('the message at the sink', () => hits.find(h => h.path === path))
    await page.getByRole('link', { name: 'Deliveries' }).first().click()
    await page.waitForURL(/\/deliveries$/)
    await expect.poll(async () => { await page.reload(); return page.getByRole('table').textContent() }).toContain('succeeded')
    await expectAccessible(page)
    await shot(page, 'webhooks-deliveries')
    await page.getByRole('row').nth(1).getByRole('link').click()
    await page.waitForURL(/\/deliveries\/[0-9a-f-]{36}$/)
    await expect.poll(() => page.getByRole('listitem').first().textContent()).toContain('success')
    await expectAccessible(page)
    await shot(page, 'webhooks-delivery-attempts')

    // The signature checker, with what the receiver got.
    await page.getByRole('link', { name: 'Signature check' }).click()
    await page.getByLabel('Signing secret').fill(secret)
    await page.getByLabel('webhook-id', { exact: true }).fill(hit.headers['webhook-id']!)
    await page.getByLabel('webhook-timestamp').fill(hit.headers['webhook-timestamp']!)
    await page.getByLabel('webhook-signature').fill(hit.headers['webhook-signature']!)
    await page.getByLabel('Body, exactly as received').fill(hit.body)
    await page.getByRole('button', { name: 'Check' }).click()
    await expect.poll(() => page.getByRole('status').textContent()).toContain('The signature verifies.')
    await page.getByLabel('Body, exactly as received').fill(`${hit.body} `)
    await page.getByRole('button', { name: 'Check' }).click()
    await expect.poll(() => page.getByRole('status').textContent()).toContain('does not verify')
    await expectAccessible(page)
    await shot(page, 'webhooks-signature-check')
  })

  it('an admin finds a dead delivery and replays it', async () => {
    const path = `/hook-${unique('dead')}`
    failing.add(path)
    const ctx = await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}${path}`)
    await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 1500), bearer(ctx.key.secret))
    await until('the delivery to die', async () => (await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries?status=dead`)).body.items.length === 1)
    failing.delete(path)
    const page = await createPage('/sign-in')
    await signInAs(page, 'admin')
    // A full page load: wait until Vue has hydrated it before clicking, or clicks go unheard.
    await page.goto(page.url().replace(/\/console.*$/, `/console/partners/${ctx.partner.id}`), { waitUntil: 'hydration' } as never)
    await page.getByRole('link', { name: 'Deliveries' }).click()
    await page.getByLabel('State').selectOption('dead')
    await page.getByRole('button', { name: 'Filter' }).click()
    await expect.poll(() => page.getByRole('table').textContent()).toContain('dead')
    await shot(page, 'webhooks-dead-delivery')
    await page.getByRole('row').nth(1).getByRole('link').click()
    await page.waitForURL(/\/deliveries\/[0-9a-f-]{36}$/)
    await page.getByRole('button', { name: 'Replay', exact: true }).click()
    await expect.poll(() => page.getByText('replay', { exact: true }).count(), { timeout: 15_000 }).toBeGreaterThan(0)
    await expect.poll(() => page.getByRole('listitem').last().textContent()).toContain('success')
    await expectAccessible(page)
    await shot(page, 'webhooks-replayed')
  })

  it('an integrator adds an API client, whose secret gets a token, and revokes it', async () => {
    const page = await createPage('/sign-in')
    await signInAs(page, 'integrator')
    await page.getByRole('link', { name: 'Webhooks' }).click()
    await page.waitForURL(/\/webhooks$/)
    await page.getByRole('link', { name: 'API clients' }).click()
    await page.waitForURL(/\/clients$/)
    await page.getByLabel('Client name').fill('LIMS nightly import')
    await page.getByRole('button', { name: 'Add client' }).click()
    const secret = (await page.getByTestId('console-secret').textContent())!
    const clientId = (await page.getByRole('row', { name: /LIMS nightly import/ }).locator('td').nth(1).textContent())!.trim()
    const token = (form: Record<string, string>) => fetch(url('/api/v1/oauth/token'), { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: new URLSearchParams({ grant_type: 'client_credentials', ...form }) })
    expect((await token({ client_id: clientId, client_secret: secret })).status).toBe(200)
    await expectAccessible(page)
    await shot(page, 'partner-api-client')
    page.once('dialog', dialog => dialog.accept())
    await page.getByRole('button', { name: 'Revoke LIMS nightly import' }).click()
    await expect.poll(() => page.getByRole('row', { name: /LIMS nightly import/ }).textContent()).toContain('revoked')
    expect((await token({ client_id: clientId, client_secret: secret })).status).toBe(401)
  })

  it('an integrator sees which labs share their results with the partner', async () => {
    const page = await createPage('/sign-in')
    await signInAs(page, 'integrator')
    await page.getByRole('link', { name: 'Webhooks' }).click()
    await page.waitForURL(/\/webhooks$/)
    await page.getByRole('navigation', { name: 'Partner' }).getByRole('link', { name: 'Details' }).click()
    await page.waitForURL(/\/partners\/[0-9a-f-]{36}$/)
    // The demo seed: Saltmarsh and Kestrel grant Northgate Water Authority; Halvard Ridge does not.
    const granted = page.getByRole('region', { name: 'Labs that share their results with this partner' })
    await expect.poll(() => granted.textContent()).toContain('Saltmarsh Stable Isotope Lab')
    expect(await granted.textContent()).toContain('Kestrel Leak-Test Services')
    expect(await granted.textContent()).not.toContain('Halvard Ridge')
    await expectAccessible(page)
    await shot(page, 'partner-granted-labs')
  })
})
