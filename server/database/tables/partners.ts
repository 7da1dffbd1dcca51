import { jsonb, pgTable, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { createdAt } from './columns'
import { users } from './access'
import { labs, partners } from './orgs'

export const partnerClients = pgTable('partner_clients', {
  id: uuid('id').primaryKey().defaultRandom(),
  partnerId: uuid('partner_id').notNull().references(() => partners.id),
  name: text('name').notNull(),
  clientId: text('client_id').notNull().unique(),
  secretHash: text('secret_hash').notNull(),
  scopes: text('scopes').array().notNull(),
  revokedAt: timestamp('revoked_at', { withTimezone: true }),
  lastUsedAt: timestamp('last_used_at', { withTimezone: true }),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
})

/** A lab lets a partner receive its results (of the listed event types). */

export const grants = pgTable('grants', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  partnerId: uuid('partner_id').notNull().references(() => partners.id),
  eventTypes: text('event_types').array().notNull(),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
}, t => [uniqueIndex('grants_lab_partner_idx').on(t.labId, t.partnerId)])

/** The hub's token-signing keys; the private half is sealed (AES-256-GCM) at rest. */

export const signingKeys = pgTable('signing_keys', {
  kid: text('kid').primaryKey(),
  alg: text('alg').notNull(),
  publicJwk: jsonb('public_jwk').$type<Record<string, unknown>>().notNull(),
  sealedPrivateJwk: text('sealed_private_jwk').notNull(),
  createdAt: createdAt(),
  retiredAt: timestamp('retired_at', { withTimezone: true }),
})

