import { pino, stdTimeFunctions, type Logger } from 'pino'

// Structured logs: one JSON object per line on stdout (pino), for whatever collects the
// process's output. Every line has level (by name), time (ISO 8601), the process role and
// pid; request lines carry the request id (server/middleware/01.requestId.ts) that the
// answer's X-Request-Id header also gives, so a client's report can be found in the logs.
// NUXT_LOG_LEVEL: fatal, error, warn, info (default), debug, trace or silent. Read from the
// environment, not runtime config: error logging is also loaded by unit tests outside Nitro.

let logger: Logger | undefined

export function useLog(): Logger {
  logger ??= pino({
    level: process.env.NUXT_LOG_LEVEL || 'info',
    base: { pid: process.pid, role: process.env.NUXT_PROCESS_ROLE || 'both' },
    timestamp: stdTimeFunctions.isoTime,
    formatters: { level: label => ({ level: label }) },
  })
  return logger
}
