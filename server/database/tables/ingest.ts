import { index, integer, jsonb, pgTable, primaryKey, text, timestamp, uuid } from 'drizzle-orm/pg-core'
import { createdAt } from './columns'
import { apiKeys } from './access'
import { labs } from './orgs'
import { acquisitions } from './results'
import { exchangeSchemas } from './schemas'

export const idempotencyKeys = pgTable('idempotency_keys', {
  apiKeyId: uuid('api_key_id').notNull().references(() => apiKeys.id, { onDelete: 'cascade' }),
  key: text('key').notNull(),
  requestHash: text('request_hash').notNull(),
  state: text('state').$type<'in-flight' | 'done'>().notNull(),
  responseStatus: integer('response_status'),
  responseBody: jsonb('response_body'),
  createdAt: createdAt(),
}, t => [primaryKey({ columns: [t.apiKeyId, t.key] })])


/** OAuth 2.0 client credentials of a partner (RFC 6749 §4.4); only the secret's SHA-256 is kept. */

export const uploads = pgTable('uploads', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  apiKeyId: uuid('api_key_id').notNull().references(() => apiKeys.id),
  schemaId: uuid('schema_id').references(() => exchangeSchemas.id),
  status: text('status').$type<'pending' | 'processing' | 'processed' | 'failed'>().notNull().default('pending'),
  // SHA-256 of the body as the lab sent it: jsonb reorders keys, so it cannot be recomputed
  // from `body` (null on uploads stored before this column).
  bodyHash: text('body_hash'),
  body: jsonb('body').$type<Record<string, unknown>>().notNull(),
  acquisitionId: uuid('acquisition_id').references(() => acquisitions.id),
  problem: jsonb('problem').$type<Record<string, unknown>>(),
  leaseUntil: timestamp('lease_until', { withTimezone: true }),
  createdAt: createdAt(),
  finishedAt: timestamp('finished_at', { withTimezone: true }),
}, t => [index('uploads_status_idx').on(t.status, t.createdAt)])

