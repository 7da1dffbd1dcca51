import { and, eq } from 'drizzle-orm'
import { deliveries } from '../../database/schema'
import { claimDueDeliveries } from './claim'
import { buryLateDeliveries, recordAttempts } from './record'
import { send, withMessages, type Queued, type Sent } from './send'
import { deliverySettings, workerId } from './settings'

// The delivery worker. Deliveries are rows (written with the event they carry); a worker
// claims due rows with FOR UPDATE SKIP LOCKED and a lease, sends each through the SSRF
// guard, signs it per Standard Webhooks (the `webhook-id` is the delivery's id, unchanged
// across retries), records the attempt, and schedules the next or finishes. A worker that
// dies keeps nothing: its leases run out and another worker takes the rows.
// The phases live beside this file: claim.ts, send.ts (with message.ts and the guard in
// outbound.ts), record.ts; this file runs them as one pipeline.

/**
 * The worker of this process, as a pipeline: claims keep a short queue of leased deliveries
 * filled, `concurrency` sends stay in flight while there is work, and finished attempts are
 * recorded in groups, one statement at a time, while the sends go on. (Run in rounds of
 * claim, send all, record, the send slots stood idle while a round was claimed and recorded,
 * and every round waited for its slowest send: 0.2 of the bare sender's rate.)
 *
 * Claims and records are large: every statement wakes PostgreSQL, and the worker when it
 * answers, on cores that the app, PostgreSQL and the receivers share. Recording whatever had
 * finished (about 20 attempts a statement) and claiming 64 at a time cost more CPU per
 * delivery in bench:delivery than groups and claims of at least 128 (figures in
 * DEVELOPERS.md, Measured).
 */
class DeliveryPipeline {
  private queue: Queued[] = []
  private sending = 0
  private finished: Sent[] = []
  private claiming = false
  private recording = false
  private recordTimer: NodeJS.Timeout | undefined
  // A claim may find due work: the worker was woken, or the last claim came back full.
  private more = false
  private stopped = true
  private idle: (() => void)[] = []

  start() {
    this.stopped = false
    this.kick()
  }

  kick() {
    if (this.stopped) return
    this.more = true
    this.pump()
  }

  /** Stops claiming and sending, records what was sent, and hands back the rest of the queue. */
  async stop() {
    this.stopped = true
    await new Promise<void>((resolve) => {
      this.idle.push(resolve)
      this.settle()
    })
    this.queue = []
    await useDb().update(deliveries).set({ leaseOwner: null, leaseUntil: null })
      .where(and(eq(deliveries.leaseOwner, workerId), eq(deliveries.status, 'pending')))
  }

  private pump() {
    const { concurrency } = deliverySettings()
    while (!this.stopped && this.sending < concurrency && this.queue.length) {
      this.sending++
      void send(this.queue.shift()!).then((sent) => {
        this.sending--
        this.finished.push(sent)
        this.record()
        this.pump()
      })
    }
    // The next claim runs while the last of the queue is sent, unless recording lags behind.
    const batch = claimSize(concurrency)
    if (!this.stopped && this.more && !this.claiming && this.queue.length < concurrency * 2 && this.finished.length < batch * 4) {
      this.more = false
      this.claiming = true
      void this.claim(batch, concurrency)
    }
    this.settle()
  }

  private async claim(batch: number, concurrency: number) {
    const { timeoutMs, leaseSeconds } = deliverySettings()
    // The lease covers the worst case: every delivery ahead of the batch's last one, and it,
    // timing out twice (p-retry's one retry), `concurrency` at a time.
    const ahead = this.queue.length + this.sending + batch
    const lease = Math.max(leaseSeconds, Math.ceil(ahead / concurrency) * Math.ceil((2 * timeoutMs + 200) / 1000) + 5)
    try {
      const rows = await claimDueDeliveries(batch, lease)
      this.queue.push(...withMessages(rows))
      // A full claim may have left due work behind. A short one took all that the endpoints'
      // limits allowed: the next record frees slots and claims again.
      if (rows.length >= batch) this.more = true
    }
    catch (error) {
      logError('[delivery] claiming failed; the next poll tries again', error)
    }
    this.claiming = false
    this.pump()
  }

  private record() {
    if (this.recording || !this.finished.length) return
    // A group waits (at most RECORD_WAIT_MS) to grow while sends are in flight; what finished
    // when nothing else is being sent, or when stopping, is recorded at once.
    if (this.finished.length < Math.min(RECORD_GROUP, deliverySettings().concurrency * GROUP_PER_SLOT) && this.sending && !this.stopped) {
      this.recordTimer ??= setTimeout(() => {
        this.recordTimer = undefined
        this.recordNow()
      }, RECORD_WAIT_MS)
      return
    }
    this.recordNow()
  }

  private recordNow() {
    if (this.recording || !this.finished.length) return
    clearTimeout(this.recordTimer)
    this.recordTimer = undefined
    this.recording = true
    const group = this.finished.splice(0, RECORD_GROUP)
    recordAttempts(group)
      .catch(error => logError('[delivery] recording attempts failed; their leases run out and they are sent again', error))
      .finally(() => {
        this.recording = false
        // The recorded deliveries' slots are free again: their endpoints may have due work.
        this.more = true
        this.record()
        this.pump()
      })
  }

  private settle() {
    if (this.stopped && !this.claiming && !this.sending && !this.recording && !this.finished.length) {
      for (const resolve of this.idle.splice(0)) resolve()
    }
  }
}

// A claim, and the group a record waits for, is this many deliveries per send slot (128 at
// a concurrency of 16), a claim at most CLAIM_MAX. At most RECORD_GROUP attempts are
// recorded by one statement, and a smaller group waits at most RECORD_WAIT_MS for more.
const GROUP_PER_SLOT = 8
const CLAIM_MAX = 512
const RECORD_GROUP = 256
const RECORD_WAIT_MS = 25
const claimSize = (concurrency: number) => Math.min(CLAIM_MAX, concurrency * GROUP_PER_SLOT)

const worker = new DeliveryPipeline()
let timer: NodeJS.Timeout | undefined
let sweepTimer: NodeJS.Timeout | undefined
// How often a worker looks for deliveries committed for an endpoint as it was disabled.
const SWEEP_MS = 60_000

/** Wakes the worker now (after an event was recorded) rather than at its next poll. */
export function kickDeliveries() {
  worker.kick()
}

export function startDeliveryWorker() {
  worker.start()
  timer = setInterval(kickDeliveries, Number(useRuntimeConfig().webhooks.pollMs))
  timer.unref()
  const sweep = () => { buryLateDeliveries().catch(error => logError('[delivery] the sweep of disabled endpoints\' deliveries failed; the next one tries again', error)) }
  sweep()
  sweepTimer = setInterval(sweep, SWEEP_MS)
  sweepTimer.unref()
}

/** Stops the worker: what is being sent is sent and recorded, and what it still holds is handed back. */
export async function stopDeliveryWorker() {
  clearInterval(timer)
  clearInterval(sweepTimer)
  await worker.stop()
}
