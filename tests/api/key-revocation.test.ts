import type { ChildProcess } from 'node:child_process'
import { afterAll, describe, expect, it } from 'vitest'
import { bearer, labWithInstrument } from '../support/lab'
import { startAppProcess, useArcwise } from '../support/server'
import { until } from '../support/webhooks'

// App processes keep key rows in memory for a few seconds; a revocation made through one
// process must stop the key at every other one at once (NOTIFY), not when its copy expires.
await useArcwise()

const OTHER_PORT = 3170
const other = `http://127.0.0.1:${OTHER_PORT}`
let child: ChildProcess | undefined
afterAll(() => { child?.kill('SIGTERM') })

async function startOtherProcess() {
  child = startAppProcess(OTHER_PORT, { NUXT_PROCESS_ROLE: 'web' })
  await until('the second app process', () => fetch(`${other}/api/health`).then(r => r.ok, () => false), 20_000)
}

const listAt = (base: string, secret: string) => fetch(`${base}/api/v1/acquisitions`, { headers: bearer(secret) })

describe('a revoked key, with two app processes', () => {
  it('is refused by the other process within moments, though that process had the key in memory', async () => {
    await startOtherProcess()
    const { admin, lab, key } = await labWithInstrument()
    // Twice, so the other process has certainly read the key and keeps it (its listener is up by then).
    expect((await listAt(other, key.secret)).status).toBe(200)
    await new Promise(r => setTimeout(r, 300))
    expect((await listAt(other, key.secret)).status).toBe(200)
    expect((await admin.delete(`/api/console/labs/${lab.id}/keys/${key.id}`)).status).toBe(200)
    // Without the notice the other process would accept the key for up to 10 s more.
    const started = Date.now()
    let status = 200
    while (Date.now() - started < 2000 && status === 200) {
      status = (await listAt(other, key.secret)).status
      if (status === 200) await new Promise(r => setTimeout(r, 50))
    }
    expect(status).toBe(401)
  })
})
