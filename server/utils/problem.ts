import { createError, type H3Error } from 'h3'
import type { ProblemDocument } from '#shared/schemas/common'

export interface FieldError { path: string, message: string }

const titles: Record<number, string> = {
  400: 'Bad request', 401: 'Not signed in', 403: 'Not allowed', 404: 'Not found', 405: 'Method not allowed',
  409: 'Conflict', 410: 'Gone', 413: 'Payload too large', 415: 'Unsupported media type',
  422: 'Validation failed', 429: 'Too many requests', 500: 'Internal error', 503: 'Unavailable',
}

/** An RFC 9457 problem document for `status`; `type` is a short Arcwise slug. */
export function problem(status: number, type: string, detail?: string, extra: { errors?: FieldError[], headers?: Record<string, string> } = {}): H3Error {
  const doc: ProblemDocument = {
    type: problemType(type),
    title: titles[status] ?? 'Error',
    status,
    ...(detail ? { detail } : {}),
    ...(extra.errors ? { errors: extra.errors } : {}),
  }
  return createError({ statusCode: status, statusMessage: doc.title, message: detail, data: { problem: doc, headers: extra.headers } })
}

export function problemType(slug: string) {
  return `urn:arcwise:problem:${slug}`
}

/** A 422 naming one field, for checks a schema cannot make (an e-mail taken, a lab that is not there). */
export function fieldProblem(path: string, message: string, status = 422, type = 'validation-failed'): H3Error {
  return problem(status, type, `${path}: ${message}`, { errors: [{ path, message }] })
}
