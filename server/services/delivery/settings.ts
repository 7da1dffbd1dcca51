import { hostname } from 'node:os'
import { randomUUID } from 'node:crypto'
import { DEFAULT_RETRY_SCHEDULE_S } from '#shared/schemas/webhooks'
import { parseRetrySchedule } from './retry'

// What the delivery worker's phases share: this worker's lease name and its settings.

/** This process's name on the leases it holds. */
export const workerId = `${hostname()}:${process.pid}:${randomUUID().slice(0, 8)}`

// Read once: the runtime config is fixed for the life of the process, and the worker asks
// for it on every send (as outbound.ts does for its guard settings).
let settings: ReturnType<typeof readConfig> | undefined
export const deliverySettings = () => (settings ??= readConfig())

function readConfig() {
  const { webhooks: w, appUrl } = useRuntimeConfig()
  return {
    schedule: parseRetrySchedule(w.retrySchedule, DEFAULT_RETRY_SCHEDULE_S),
    timeoutMs: Number(w.timeoutMs),
    leaseSeconds: Number(w.leaseSeconds),
    concurrency: Number(w.concurrency),
    endpointInFlight: Number(w.endpointInFlight),
    endpointMaxInFlight: Number(w.endpointMaxInFlight),
    endpointMaxRatePerSecond: Number(w.endpointMaxRatePerSecond),
    circuitFailures: Number(w.circuitFailures),
    circuitProbeSeconds: Number(w.circuitProbeSeconds),
    maxPayloadBytes: Number(w.maxPayloadBytes),
    disableAfterMs: Number(w.disableAfterHours) * 3600_000,
    // Thin messages name where the whole result is read.
    appUrl: String(appUrl),
  }
}

