import type { H3Event } from 'h3'
import type { z } from 'zod'
import { problem, type FieldError } from './problem'

/** Zod issues as problem-document field errors, each named by its dotted path. */
export function fieldErrors(error: z.ZodError): FieldError[] {
  return error.issues.map(issue => ({ path: issue.path.map(String).join('.') || '(body)', message: issue.message }))
}

function parseOrProblem<S extends z.ZodType>(schema: S, value: unknown, where: string): z.output<S> {
  const result = schema.safeParse(value)
  if (result.success) return result.data
  const errors = fieldErrors(result.error)
  throw problem(where === 'body' ? 422 : 400, 'validation-failed', errors.map(e => `${e.path}: ${e.message}`).join('; '), { errors })
}

/** The JSON body parsed by `schema`: 400 for JSON that does not parse, 422 naming each bad field. */
export async function readValidBody<S extends z.ZodType>(event: H3Event, schema: S): Promise<z.output<S>> {
  const raw = await readRawBody(event, 'utf8')
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
