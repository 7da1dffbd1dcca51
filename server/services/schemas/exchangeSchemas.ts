import { and, asc, desc, eq, sql } from 'drizzle-orm'
import { z } from 'zod'
import { exchangeSchemaDeprecations, exchangeSchemaSources, type ExchangeSchemaName } from '#shared/schemas/exchange'
import { exchangeSchemas, labs, schemaUsage } from '../../database/schema'

/** Makes sure every schema version Arcwise speaks is in the registry (JSON Schema from zod). */
export async function registerExchangeSchemas() {
  for (const [name, versions] of Object.entries(exchangeSchemaSources)) {
    for (const [version, schema] of Object.entries(versions)) {
      const jsonSchema = z.toJSONSchema(schema as z.ZodType, { io: 'input', unrepresentable: 'any' }) as Record<string, unknown>
      const deprecated = exchangeSchemaDeprecations[name as ExchangeSchemaName]?.[Number(version)]
      await useDb().insert(exchangeSchemas).values({ name, version: Number(version), jsonSchema: { ...jsonSchema, title: `${name} v${version}` }, ...(deprecated ? { status: 'deprecated' as const, deprecatedAt: new Date(), sunsetAt: new Date(deprecated.sunsetAt) } : {}) })
        .onConflictDoUpdate({ target: [exchangeSchemas.name, exchangeSchemas.version], set: { jsonSchema: { ...jsonSchema, title: `${name} v${version}` } } })
    }
  }
}

export async function listExchangeSchemas() {
  const rows = await useDb().select({
    id: exchangeSchemas.id, name: exchangeSchemas.name, version: exchangeSchemas.version, status: exchangeSchemas.status,
    deprecatedAt: exchangeSchemas.deprecatedAt, sunsetAt: exchangeSchemas.sunsetAt,
  }).from(exchangeSchemas).orderBy(asc(exchangeSchemas.name), desc(exchangeSchemas.version))
  return rows
}

export async function getExchangeSchema(name: string, version: number) {
  const row = await useDb().query.exchangeSchemas.findFirst({ where: and(eq(exchangeSchemas.name, name), eq(exchangeSchemas.version, version)) })
  if (!row) throw problem(404, 'schema-not-found', `No exchange schema ${name} v${version}.`)
  return row
}

export async function schemaUsers(schemaId: string) {
  return useDb().select({ lab: labs.slug, labName: labs.name, uses: schemaUsage.uses, lastUsedAt: schemaUsage.lastUsedAt })
    .from(schemaUsage).innerJoin(labs, eq(labs.id, schemaUsage.labId)).where(eq(schemaUsage.schemaId, schemaId)).orderBy(desc(schemaUsage.lastUsedAt))
}

export async function setSchemaStatus(audit: AuditContext, id: string, change: { status: 'current' | 'deprecated' | 'retired', sunsetAt?: Date | null }) {
  const [row] = await useDb().update(exchangeSchemas).set({
    status: change.status, sunsetAt: change.sunsetAt ?? null, deprecatedAt: change.status === 'current' ? null : sql`coalesce(${exchangeSchemas.deprecatedAt}, now())`,
  }).where(eq(exchangeSchemas.id, id)).returning()
  if (!row) throw problem(404, 'schema-not-found', 'No such exchange schema.')
  schemaCache.clear()
  await recordAudit(useDb(), { ...audit, action: 'schema.status-changed', targetType: 'exchange-schema', targetId: id, detail: { name: row.name, version: row.version, status: row.status, sunsetAt: row.sunsetAt } })
  return row
}

/**
 * The schema version a request uses; a retired version is refused. Writes nothing: the use
 * is counted with the accepted request (`countSchemaUse`), and the request's Deprecation
 * headers are set by `requireExchangeSchema` (server/utils/exchangeSchemaHeaders.ts).
 */
export async function checkExchangeSchema(name: ExchangeSchemaName, version: number) {
  const row = await cachedExchangeSchema(name, version).catch(() => { throw fieldProblem('Arcwise-Schema-Version', `no ${name} schema v${version}`, 400, 'schema-unknown') })
  if (row.status === 'retired') throw fieldProblem('Arcwise-Schema-Version', `${name} v${version} is retired; use a current version`, 400, 'schema-retired')
  return row
}

// Every accepted request names a schema version, and versions change status rarely: each
// process keeps what it read for a few seconds (and forgets it at once when it changes a
// status itself), which saves a query on the ingest path. Another process's change to a
// status shows here within SCHEMA_CACHE_MS.
const SCHEMA_CACHE_MS = 5000
const schemaCache = new Map<string, { row: Promise<typeof exchangeSchemas.$inferSelect>, until: number }>()
function cachedExchangeSchema(name: string, version: number) {
  const key = `${name}/${version}`
  const hit = schemaCache.get(key)
  if (hit && hit.until > Date.now()) return hit.row
  const row = getExchangeSchema(name, version)
  schemaCache.set(key, { row, until: Date.now() + SCHEMA_CACHE_MS })
  row.catch(() => schemaCache.delete(key))
  return row
}

// Uses are counted in memory and written every few seconds: one row per schema and lab
// would otherwise be a hot row that every accepted acquisition waits on.
const pendingUses = new Map<string, { schemaId: string, labId: string, uses: number, at: Date }>()

/** Counts a use of a schema version by a lab (after the request was accepted). */
export function countSchemaUse(schemaId: string, labId: string) {
  const key = `${schemaId}|${labId}`
  const entry = pendingUses.get(key) ?? { schemaId, labId, uses: 0, at: new Date() }
  entry.uses++
  entry.at = new Date()
  pendingUses.set(key, entry)
}

export async function flushSchemaUses() {
  const batch = [...pendingUses.values()]
  pendingUses.clear()
  for (const u of batch) {
    await useDb().insert(schemaUsage).values({ schemaId: u.schemaId, labId: u.labId, uses: u.uses, lastUsedAt: u.at })
      .onConflictDoUpdate({ target: [schemaUsage.schemaId, schemaUsage.labId], set: { uses: sql`${schemaUsage.uses} + ${u.uses}`, lastUsedAt: u.at } })
  }
}
