import { useLog } from './logger'

// Error logs say what failed without what it was given: a failed query's bound parameters
// (Drizzle's message ends with "params: …": tokens, hashes, e-mails, mail bodies with live
// links) are cut off, request paths lose their query string, and no error object is dumped
// (postgres.js errors carry the query's parameters as a property).

type Link = { name?: unknown, message?: unknown, code?: unknown, stack?: unknown, cause?: unknown } | null | undefined

/** Each error of the cause chain by name, SQLSTATE, message (parameters cut) and stack frames. */
export function safeErrorChain(error: unknown) {
  const chain: { name: string, code?: string, message: string, stack?: string }[] = []
  for (let e = error as Link; e && typeof e === 'object' && chain.length < 5; e = e.cause as Link) {
    const message = String(e.message ?? '').split('\nparams:')[0]!.slice(0, 2000)
    // Frames only: a stack's first line repeats the message, parameters and all.
    const frames = typeof e.stack === 'string' ? e.stack.split('\n').filter(l => l.trimStart().startsWith('at ')).slice(0, 8).join('\n') : undefined
    chain.push({ name: String(e.name ?? 'Error'), ...(typeof e.code === 'string' ? { code: e.code } : {}), message, ...(frames ? { stack: frames } : {}) })
  }
  if (!chain.length) chain.push({ name: typeof error, message: String(error).split('\nparams:')[0]!.slice(0, 2000) })
  return chain
}

/** What the log says of a request that failed unexpectedly (5xx): no query string, no parameters. */
export function unexpectedErrorFields(error: unknown, method: string, path: string) {
  return { method, path: path.split('?')[0], errors: safeErrorChain(error) }
}

/** The same as one JSON line (what tests/unit/secrets-and-logs.test.ts reads). */
export function unexpectedErrorLine(error: unknown, method: string, path: string): string {
  return JSON.stringify({ level: 'error', msg: 'unexpected error', ...unexpectedErrorFields(error, method, path) })
}

/** Logs a background failure (`what` says which) as one structured line. */
export function logError(what: string, error: unknown) {
  useLog().error({ errors: safeErrorChain(error) }, what)
}
