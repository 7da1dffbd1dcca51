import type { H3Event } from 'h3'
import type { z } from 'zod'
import { problem, type FieldError } from './problem'
import { readBodyText } from './requestBody'

/**
 * Zod issues as problem-document field errors, each named by its dotted path. An unknown key
 * (strict objects) is named by its own path, one error per key, so `__proto__` or a typo
 * such as `analyzerRadius.uncertainty` is what the caller reads.
 */
export function fieldErrors(error: z.ZodError): FieldError[] {
  return error.issues.flatMap((issue) => {
    const at = issue.path.map(String)
    if (issue.code === 'unrecognized_keys') return issue.keys.map(key => ({ path: [...at, key].join('.'), message: `Unrecognized key: "${key}" is not a field here` }))
    return [{ path: at.join('.') || '(body)', message: issue.message }]
  })
}

/** `value` parsed by `schema`: a problem naming each bad field otherwise (422 for a body, 400 for a query). */
export function parseOrProblem<S extends z.ZodType>(schema: S, value: unknown, where: 'body' | 'query'): z.output<S> {
  const result = schema.safeParse(value)
  if (result.success) return result.data
  const errors = fieldErrors(result.error)
  throw problem(where === 'body' ? 422 : 400, 'validation-failed', errors.map(e => `${e.path}: ${e.message}`).join('; '), { errors })
}

/**
 * The JSON body parsed by `schema`: 400 for JSON that does not parse, 422 naming each bad
 * field, 413 past the route's byte cap (server/utils/requestBody.ts).
 */
export async function readValidBody<S extends z.ZodType>(event: H3Event, schema: S): Promise<z.output<S>> {
  const raw = await readBodyText(event)
  let value: unknown
  try { value = raw ? JSON.parse(raw) : undefined }
  catch { throw problem(400, 'malformed-json', 'The request body is not valid JSON.') }
  return parseOrProblem(schema, value ?? {}, 'body')
}

export function getValidQuery<S extends z.ZodType>(event: H3Event, schema: S): z.output<S> {
  return parseOrProblem(schema, getQuery(event), 'query')
}

export function getValidParams<S extends z.ZodType>(event: H3Event, schema: S): z.output<S> {
  // A malformed id names nothing that exists: answer as for a missing one.
  const result = schema.safeParse(getRouterParams(event, { decode: true }))
  if (!result.success) throw problem(404, 'not-found', 'No such resource.')
  return result.data
}
