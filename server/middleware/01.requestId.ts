import { randomUUID } from 'node:crypto'
import { observeRequest } from '../services/metrics'

// Every request gets an id: the caller's X-Request-Id when it is a sane token (1–64 of
// letters, digits, '.', '_', '-'), so a lab system's own id can be followed through the hub,
// else a new UUID. The answer carries it in X-Request-Id. Once the answer is sent (or the
// client went away) the request is timed into the metrics and logged with its id: API and
// well-known requests at info, pages and assets at debug. The socket's close is used rather
// than Nitro's afterResponse hook, which h3 does not call for answers made by the error
// handler (every 4xx and 5xx).
const MAX_ID = 64

function isSaneId(value: string) {
  if (!value.length || value.length > MAX_ID) return false
  for (let i = 0; i < value.length; i++) {
    const c = value.charCodeAt(i)
    const ok = (c >= 48 && c <= 57) || (c >= 65 && c <= 90) || (c >= 97 && c <= 122) || c === 45 || c === 46 || c === 95
    if (!ok) return false
  }
  return true
}

export default defineEventHandler((event) => {
  const given = getRequestHeader(event, 'x-request-id')
  const id = given && isSaneId(given) ? given : randomUUID()
  event.context.requestId = id
  setResponseHeader(event, 'x-request-id', id)
  const started = performance.now()
  const res = event.node.res
  res.once('close', () => {
    const seconds = (performance.now() - started) / 1000
    const path = event.path.split('?')[0]!
    observeRequest(event.method, path, res.statusCode, seconds)
    const fields = { reqId: id, method: event.method, path, status: res.statusCode, ms: Math.round(seconds * 10_000) / 10, ...(res.writableFinished ? {} : { aborted: true }) }
    if (path.startsWith('/api/') || path.startsWith('/.well-known/')) useLog().info(fields, 'request')
    else useLog().debug(fields, 'request')
  })
})
