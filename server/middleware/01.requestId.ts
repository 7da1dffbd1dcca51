import { randomUUID } from 'node:crypto'

// Every request gets an id: the caller's X-Request-Id when it is a sane token (1–64 of
// letters, digits, '.', '_', '-'), so a lab system's own id can be followed through the hub,
// else a new UUID. The answer carries it in X-Request-Id and every log line of the request
// names it (server/plugins/requestLog.ts). The start time is kept for the answer-time metric.
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
  event.context.startedAt = performance.now()
  setResponseHeader(event, 'x-request-id', id)
})
