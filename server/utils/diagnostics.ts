import { monitorEventLoopDelay, type IntervalHistogram } from 'node:perf_hooks'

// What `npm run chaos` reads from inside each app process (NUXT_DIAGNOSTICS=true only): the
// worst event-loop delay since the last reset, and the process's peak resident set.
// monitorEventLoopDelay samples every `resolution` ms; a request that holds the loop for
// 3 s shows as a 3 s delay once the loop runs again.
let histogram: IntervalHistogram | undefined

export function startDiagnostics() {
  histogram ??= monitorEventLoopDelay({ resolution: 10 })
  histogram.enable()
}

export function resetDiagnostics() {
  histogram?.reset()
}

export function diagnosticsReading() {
  const h = histogram
  return {
    eventLoopDelayMaxMs: h ? h.max / 1e6 : null,
    eventLoopDelayP99Ms: h ? h.percentile(99) / 1e6 : null,
    // getrusage's ru_maxrss (kB on Linux): the high-water mark of the process's whole life,
    // the same figure as VmHWM in /proc/<pid>/status.
    peakRssBytes: process.resourceUsage().maxRSS * 1024,
    rssBytes: process.memoryUsage.rss(),
    pid: process.pid,
  }
}
