import { bigint, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { createdAt } from './columns'
import { labs } from './orgs'

export const schemaStatusEnum = pgEnum('schema_status', ['current', 'deprecated', 'retired'])

/** Versioned payload schemas (JSON Schema 2020-12) that labs and partners exchange. */

export const exchangeSchemas = pgTable('exchange_schemas', {
  id: uuid('id').primaryKey().defaultRandom(),
  name: text('name').notNull(),
  version: integer('version').notNull(),
  status: schemaStatusEnum('status').notNull().default('current'),
  jsonSchema: jsonb('json_schema').$type<Record<string, unknown>>().notNull(),
  deprecatedAt: timestamp('deprecated_at', { withTimezone: true }),
  sunsetAt: timestamp('sunset_at', { withTimezone: true }),
  createdAt: createdAt(),
}, t => [uniqueIndex('exchange_schemas_name_version_idx').on(t.name, t.version)])

/** Who still uses a schema version: last use per lab. */

export const schemaUsage = pgTable('schema_usage', {
  schemaId: uuid('schema_id').notNull().references(() => exchangeSchemas.id, { onDelete: 'cascade' }),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  uses: bigint('uses', { mode: 'number' }).notNull().default(0),
  lastUsedAt: timestamp('last_used_at', { withTimezone: true }).notNull().defaultNow(),
}, t => [primaryKey({ columns: [t.schemaId, t.labId] })])

/**
 * Uploads too large to process inline: stored as accepted (the 202 promise), then
 * processed in the background; `acquisitionId` or `problem` tells how it ended.
 */
