import { setTimeout as sleep } from 'node:timers/promises'

// Ingest-to-receipt latency as lab systems would see it: acquisitions posted open-loop (each
// at its scheduled moment, not after the one before), timed until the partner's receiver has
// each run's result.

/** The q-quantile of sorted values (nearest rank). */
export const quantile = (sorted: number[], q: number) => sorted[Math.min(sorted.length - 1, Math.ceil(q * sorted.length) - 1)] ?? NaN

/** Notes when a webhook message (its body) reached the receiver; a retry does not move its time. */
export function noteArrival(arrived: Map<string, number>, body: string) {
  const at = performance.now()
  const runId = (JSON.parse(body) as { data: { runId: string } }).data.runId
  if (!arrived.has(runId)) arrived.set(runId, at)
}

/**
 * Posts `count` runs at `rate` a second through `send`, which resolves with the moment a
 * run's latency counts from (before its post, or once it was answered). `arrived` holds when
 * the receiver got each run id's result (performance.now()); this waits up to 60 s for all.
 * A result that reached the receiver before its answer reached the lab system counts as 0.
 */
export async function openLoopLatency(opts: { count: number, rate: number, runIdPrefix: string, send: (runId: string) => Promise<number>, arrived: Map<string, number> }) {
  const { count, rate, send, arrived } = opts
  const from = new Map<string, number>()
  const posts: Promise<void>[] = []
  const started = performance.now()
  for (let n = 0; n < count; n++) {
    const runId = `${opts.runIdPrefix}-${n}`
    await sleep(Math.max(0, started + n * 1000 / rate - performance.now()))
    posts.push(send(runId).then((t) => { from.set(runId, t) }))
  }
  await Promise.all(posts)
  const postedPerSecond = count / ((performance.now() - started) / 1000)
  const deadline = performance.now() + 60_000
  while ([...from.keys()].some(id => !arrived.has(id)) && performance.now() < deadline) await sleep(20)
  const latencies = [...from].filter(([id]) => arrived.has(id)).map(([id, t]) => Math.max(0, arrived.get(id)! - t)).sort((a, b) => a - b)
  return {
    postedPerSecond: Math.round(postedPerSecond), received: latencies.length,
    ms: { p50: Math.round(quantile(latencies, 0.5)), p99: Math.round(quantile(latencies, 0.99)), max: Math.round(latencies.at(-1) ?? NaN) },
  }
}
