// Posts acquisitions as a lab's own system would: over HTTP, with the lab's key and an
// Idempotency-Key, retrying a failed request with the same key.
import pRetry from 'p-retry'
import { demoInstruments } from './demo-instruments'

/**
 * Posts one acquisition; a 5xx or a broken connection is sent again with the same key, after
 * the answer's Retry-After when it names one (503 while the object store is down), else after
 * p-retry's growing pause; six tries in all.
 */
export async function postAcquisition(appUrl: string, secret: string, body: unknown, idempotencyKey: string) {
  let retryAfterMs = 0
  return pRetry(async () => {
    if (retryAfterMs) await new Promise(r => setTimeout(r, retryAfterMs))
    retryAfterMs = 0
    const res = await fetch(`${appUrl}/api/v1/acquisitions`, {
      method: 'POST',
      headers: { 'content-type': 'application/json', 'authorization': `Bearer ${secret}`, 'idempotency-key': idempotencyKey },
      body: JSON.stringify(body),
    })
    if (res.status >= 500) {
      const seconds = Number(res.headers.get('retry-after'))
      if (seconds > 0) retryAfterMs = Math.min(seconds, 60) * 1000
      await res.arrayBuffer()
      throw new Error(`server answered ${res.status}`)
    }
    return { status: res.status, body: await res.json() as Record<string, unknown> }
  }, { retries: 5, minTimeout: 500 })
}

/**
 * The demo's history, posted once: each instrument at its own pace over the last 12 days
 * (the carbonate bench busiest, the noble-gas sector a run most days), so the overview's
 * per-lab chart tells the labs apart.
 */
const demoRunsPerInstrument: Record<string, number> = { 'irms-north': 22, 'noble-gas-1': 9, 'he-leak-2': 15 }

export async function postDemoHistory(appUrl: string, keys: Record<string, string>) {
  let posted = 0
  for (const inst of demoInstruments) {
    const secret = keys[inst.lab]
    if (!secret) continue
    const runs = demoRunsPerInstrument[inst.slug] ?? 8
    for (let k = 0; k < runs; k++) {
      // Evenly over 12 days, moved by up to ±5 h so that runs do not fall on the same hour.
      const hoursAgo = (runs - k) * (12 * 24 / runs) + ((k * 7919) % 11) - 5
      const acquiredAt = new Date(Date.now() - hoursAgo * 3_600_000)
      const runId = `demo-${inst.slug}-${String(k + 1).padStart(3, '0')}`
      const res = await postAcquisition(appUrl, secret, inst.acquisition(runId, acquiredAt, k + 1), runId)
      if (res.status === 201) posted++
    }
  }
  return posted
}
