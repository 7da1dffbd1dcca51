import type { H3Event } from 'h3'
import type { ExchangeSchemaName } from '#shared/schemas/exchange'
import type { exchangeSchemas } from '../database/schema'

// The request side of exchange schemas: the version a request names, and the Deprecation and
// Sunset headers its answer carries when that version is deprecated.

/** The schema version a request names in `Arcwise-Schema-Version` (default 1). */
export function requestedSchemaVersion(event: H3Event): number {
  const raw = getRequestHeader(event, 'arcwise-schema-version')
  if (raw === undefined) return 1
  const version = Number(raw)
  if (!Number.isInteger(version) || version < 1) throw fieldProblem('Arcwise-Schema-Version', 'must be a positive whole number', 400, 'schema-unknown')
  return version
}

/** The exchange schema `name` at the request's version (checkExchangeSchema), with the answer's Deprecation headers set. */
export async function requireExchangeSchema(event: H3Event, name: ExchangeSchemaName) {
  const row = await checkExchangeSchema(name, requestedSchemaVersion(event))
  announceDeprecation(event, row)
  return row
}

/** Deprecation (RFC 9745), Sunset (RFC 8594) and a link to the schema, for a deprecated version. */
export function announceDeprecation(event: H3Event, row: typeof exchangeSchemas.$inferSelect) {
  if (row.status !== 'deprecated') return
  setResponseHeader(event, 'deprecation', `@${Math.floor((row.deprecatedAt ?? new Date()).getTime() / 1000)}`)
  if (row.sunsetAt) setResponseHeader(event, 'sunset', row.sunsetAt.toUTCString())
  setResponseHeader(event, 'link', `</api/v1/schemas/${row.name}/${row.version}>; rel="deprecation"`)
}
