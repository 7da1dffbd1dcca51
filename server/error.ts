import type { H3Error } from 'h3'
import { isError, setResponseHeader, setResponseStatus, send } from 'h3'
import type { ProblemDocument } from '#shared/schemas/common'
import { unexpectedErrorFields } from './utils/errorLog'
import { useLog } from './utils/logger'
import { problemType } from './utils/problem'

// API routes answer every error as an RFC 9457 problem document; pages fall through to
// Nuxt's own error page (the next handler in the chain).
export default defineNitroErrorHandler(async (error, event) => {
  const path = event.path || ''
  const operator = path === '/metrics' || path === '/readyz' || path === '/livez'
  if (!path.startsWith('/api/') && !path.startsWith('/.well-known/') && !path.startsWith('/_bench/') && !operator) return

  const h3 = isError(error) ? (error as H3Error) : undefined
  const data = h3?.data as { problem?: ProblemDocument, headers?: Record<string, string> } | undefined
  let doc: ProblemDocument
  if (data?.problem) {
    doc = data.problem
  }
  else {
    const status = h3?.statusCode ?? 500
    if (status >= 500) useLog().error({ reqId: event.context.requestId, ...unexpectedErrorFields(error, event.method, path) }, 'unexpected error')
    doc = {
      type: problemType(status === 404 ? 'not-found' : status >= 500 ? 'internal' : 'http-error'),
      title: status >= 500 ? 'Internal error' : (h3?.statusMessage || 'Error'),
      status,
      // Never leak internals of an unexpected failure.
      ...(status < 500 && h3?.message ? { detail: h3.message } : {}),
    }
  }
  doc.instance ??= path.split('?')[0]
  for (const [name, value] of Object.entries(data?.headers ?? {})) setResponseHeader(event, name, value)
  setResponseStatus(event, doc.status)
  setResponseHeader(event, 'content-type', 'application/problem+json')
  setResponseHeader(event, 'cache-control', 'no-store')
  await send(event, JSON.stringify(doc))
})

