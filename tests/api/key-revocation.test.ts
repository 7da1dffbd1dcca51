import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { afterAll, describe, expect, it } from 'vitest'
import { rootDir, testEnv } from '../support/env'
import { bearer, labWithInstrument } from '../support/lab'
import { useArcwise } from '../support/server'

// App processes keep key rows in memory for a few seconds; a revocation made through one
// process must stop the key at every other one at once (NOTIFY), not when its copy expires.
await useArcwise()

const OTHER_PORT = 3170
const other = `http://127.0.0.1:${OTHER_PORT}`
let child: ChildProcess | undefined
afterAll(() => { child?.kill('SIGTERM') })

async function startOtherProcess() {
  child = spawn(process.execPath, [join(rootDir, '.output', 'server', 'index.mjs')], {
    env: { ...process.env, ...testEnv().serverEnv, NUXT_PROCESS_ROLE: 'web', PORT: String(OTHER_PORT), HOST: '127.0.0.1', NODE_ENV: 'production' },
    stdio: 'ignore',
  })
  for (let i = 0; i < 100; i++) {
    try { if ((await fetch(`${other}/api/health`)).ok) return }
    catch { /* not up yet */ }
    await new Promise(r => setTimeout(r, 200))
  }
  throw new Error('the second app process did not start')
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
