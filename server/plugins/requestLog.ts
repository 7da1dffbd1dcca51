import { observeRequest } from '../services/metrics'

// After each answer: one log line for API and well-known requests (pages and assets only at
// debug), with the request id, and the answer time into the metrics.
export default defineNitroPlugin((nitro) => {
  const log = useLog()
  nitro.hooks.hook('afterResponse', (event) => {
    const started = event.context.startedAt as number | undefined
    if (started === undefined) return
    const seconds = (performance.now() - started) / 1000
    const status = getResponseStatus(event)
    const path = event.path.split('?')[0]!
    observeRequest(event.method, path, status, seconds)
    const api = path.startsWith('/api/') || path.startsWith('/.well-known/')
    const fields = { reqId: event.context.requestId, method: event.method, path, status, ms: Math.round(seconds * 10_000) / 10 }
    if (api) log.info(fields, 'request')
    else log.debug(fields, 'request')
  })
})
