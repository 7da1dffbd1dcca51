// Posts acquisitions as a lab's own system would: over HTTP, with the lab's key and an
// Idempotency-Key, retrying a failed request with the same key.
import pRetry from 'p-retry'
import { demoInstruments } from './demo-instruments'

export async function postAcquisition(appUrl: string, secret: string, body: unknown, idempotencyKey: string) {
  return pRetry(async () => {
    const res = await fetch(`${appUrl}/api/v1/acquisitions`, {
      method: 'POST',
      headers: { 'content-type': 'application/json', 'authorization': `Bearer ${secret}`, 'idempotency-key': idempotencyKey },
      body: JSON.stringify(body),
    })
    if (res.status >= 500) throw new Error(`server answered ${res.status}`)
    return { status: res.status, body: await res.json() as Record<string, unknown> }
  }, { retries: 3, minTimeout: 500 })
}

/** The demo's history: a few acquisitions per instrument over the last days, posted once. */
export async function postDemoHistory(appUrl: string, keys: Record<string, string>, perInstrument = 12) {
  let posted = 0
  for (const inst of demoInstruments) {
    const secret = keys[inst.lab]
    if (!secret) continue
    for (let k = 0; k < perInstrument; k++) {
      // Spread over the last 13 days, so the overview's two-week chart has a history.
      const acquiredAt = new Date(Date.now() - (perInstrument - k) * 26 * 3_600_000)
      const runId = `demo-${inst.slug}-${String(k + 1).padStart(3, '0')}`
      const res = await postAcquisition(appUrl, secret, inst.acquisition(runId, acquiredAt, k + 1), runId)
      if (res.status === 201) posted++
    }
  }
  return posted
}
