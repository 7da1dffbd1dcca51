import { bigint, foreignKey, index, integer, jsonb, pgTable, primaryKey, text, timestamp, uuid } from 'drizzle-orm/pg-core'
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
  // The body as JSON with the object store off; with it on, the references (as on acquisitions).
  body: jsonb('body').$type<Record<string, unknown>>(),
  rawSha256: text('raw_sha256'),
  rawBytes: bigint('raw_bytes', { mode: 'number' }),
  rawContentType: text('raw_content_type'),
  arraysSha256: text('arrays_sha256'),
  arraysBytes: bigint('arrays_bytes', { mode: 'number' }),
  acquisitionId: uuid('acquisition_id'),
  // The acquisition's created_at (its month), for the composite foreign key.
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }),
  problem: jsonb('problem').$type<Record<string, unknown>>(),
  leaseUntil: timestamp('lease_until', { withTimezone: true }),
  createdAt: createdAt(),
  finishedAt: timestamp('finished_at', { withTimezone: true }),
}, t => [
  index('uploads_status_idx').on(t.status, t.createdAt),
  foreignKey({ name: 'uploads_acquisition_fk', columns: [t.acquisitionId, t.acquisitionCreatedAt], foreignColumns: [acquisitions.id, acquisitions.createdAt] }),
])


/**
 * Keys of the object store claimed by writers (server/services/store/objects.ts): a writer
 * claims a key before it writes the object and references it; retention deletes only keys
 * whose claim is old and that no live row references, under this row's lock.
 */
export const storeObjects = pgTable('store_objects', {
  key: text('key').primaryKey(),
  bytes: bigint('bytes', { mode: 'number' }).notNull(),
  claimedAt: timestamp('claimed_at', { withTimezone: true }).notNull().defaultNow(),
})
