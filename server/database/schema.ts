import { sql } from 'drizzle-orm'
import { bigint, bigserial, boolean, check, doublePrecision, index, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { roles } from '../../shared/types/roles'
import { partnerKinds } from '../../shared/schemas/orgs'

const createdAt = () => timestamp('created_at', { withTimezone: true }).notNull().defaultNow()
const updatedAt = () => timestamp('updated_at', { withTimezone: true }).notNull().defaultNow()

export const roleEnum = pgEnum('role', roles)
export const partnerKindEnum = pgEnum('partner_kind', partnerKinds)
export const userStatusEnum = pgEnum('user_status', ['active', 'disabled'])

export const labs = pgTable('labs', {
  id: uuid('id').primaryKey().defaultRandom(),
  slug: text('slug').notNull().unique(),
  name: text('name').notNull(),
  site: text('site').notNull(),
  contactEmail: text('contact_email').notNull(),
  // Last event sequence number handed out for this lab (events are numbered per lab).
  eventSequence: bigint('event_sequence', { mode: 'number' }).notNull().default(0),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
})

export const partners = pgTable('partners', {
  id: uuid('id').primaryKey().defaultRandom(),
  slug: text('slug').notNull().unique(),
  name: text('name').notNull(),
  kind: partnerKindEnum('kind').notNull(),
  contactEmail: text('contact_email').notNull(),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
})

export const users = pgTable('users', {
  id: uuid('id').primaryKey().defaultRandom(),
  email: text('email').notNull().unique(),
  name: text('name').notNull(),
  passwordHash: text('password_hash').notNull(),
  role: roleEnum('role').notNull(),
  labId: uuid('lab_id').references(() => labs.id),
  partnerId: uuid('partner_id').references(() => partners.id),
  status: userStatusEnum('status').notNull().default('active'),
  // Bumped on password change so that older sessions stop working.
  sessionVersion: integer('session_version').notNull().default(1),
  lastSignInAt: timestamp('last_sign_in_at', { withTimezone: true }),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
}, t => [
  check('users_role_scope', sql`(${t.role} = 'lab_manager') = (${t.labId} is not null) and (${t.role} = 'integrator') = (${t.partnerId} is not null)`),
])

/**
 * One row per console sign-in; the cookie carries its id. Signing out or an admin ending a
 * user's sessions sets `ended_at`, and the guards refuse a cookie whose row has ended, so a
 * copied cookie stops working on the server, not only in the browser that signed out.
 */
export const userSessions = pgTable('user_sessions', {
  id: uuid('id').primaryKey().defaultRandom(),
  userId: uuid('user_id').notNull().references(() => users.id, { onDelete: 'cascade' }),
  createdAt: createdAt(),
  expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
  endedAt: timestamp('ended_at', { withTimezone: true }),
  ip: text('ip'),
  userAgent: text('user_agent'),
}, t => [index('user_sessions_user_idx').on(t.userId)])

export const invitations = pgTable('invitations', {
  id: uuid('id').primaryKey().defaultRandom(),
  email: text('email').notNull(),
  name: text('name'),
  role: roleEnum('role').notNull(),
  labId: uuid('lab_id').references(() => labs.id),
  partnerId: uuid('partner_id').references(() => partners.id),
  tokenHash: text('token_hash').notNull().unique(),
  invitedBy: uuid('invited_by').references(() => users.id),
  expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
  acceptedAt: timestamp('accepted_at', { withTimezone: true }),
  revokedAt: timestamp('revoked_at', { withTimezone: true }),
  createdAt: createdAt(),
}, t => [index('invitations_email_idx').on(t.email)])

export const passwordResetTokens = pgTable('password_reset_tokens', {
  id: uuid('id').primaryKey().defaultRandom(),
  userId: uuid('user_id').notNull().references(() => users.id, { onDelete: 'cascade' }),
  tokenHash: text('token_hash').notNull().unique(),
  expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
  usedAt: timestamp('used_at', { withTimezone: true }),
  createdAt: createdAt(),
})

export const auditLog = pgTable('audit_log', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  at: timestamp('at', { withTimezone: true }).notNull().defaultNow(),
  actorUserId: uuid('actor_user_id').references(() => users.id, { onDelete: 'set null' }),
  // Kept beside the id so the entry still reads right after the user is gone.
  actorLabel: text('actor_label').notNull(),
  action: text('action').notNull(),
  targetType: text('target_type'),
  targetId: text('target_id'),
  detail: jsonb('detail').$type<Record<string, unknown>>().notNull().default({}),
  ip: text('ip'),
}, t => [index('audit_log_at_idx').on(t.at), index('audit_log_action_idx').on(t.action)])

export const mailStatusEnum = pgEnum('mail_status', ['pending', 'sent', 'failed'])

/** Mail is written here in the same transaction as the change that owes it, then sent. */
export const mailOutbox = pgTable('mail_outbox', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  to: text('to').notNull(),
  subject: text('subject').notNull(),
  text: text('text').notNull(),
  html: text('html').notNull(),
  status: mailStatusEnum('status').notNull().default('pending'),
  attempts: integer('attempts').notNull().default(0),
  lastError: text('last_error'),
  nextAttemptAt: timestamp('next_attempt_at', { withTimezone: true }).notNull().defaultNow(),
  createdAt: createdAt(),
  sentAt: timestamp('sent_at', { withTimezone: true }),
}, t => [index('mail_outbox_due_idx').on(t.status, t.nextAttemptAt)])

/** rate-limiter-flexible's Drizzle store: one row per key, shared by every app process. */
export const rateLimits = pgTable('rate_limits', {
  key: text('key').primaryKey(),
  points: integer('points').notNull().default(0),
  expire: timestamp('expire', { withTimezone: true }),
})



// ── Instruments, keys and acquisitions ──────────────────────────────────────────────────

export const instruments = pgTable('instruments', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  slug: text('slug').notNull(),
  name: text('name').notNull(),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
}, t => [uniqueIndex('instruments_lab_slug_idx').on(t.labId, t.slug)])

/** Every change of an instrument's geometry is a new version, valid from a given time. */
export const geometryVersions = pgTable('geometry_versions', {
  id: uuid('id').primaryKey().defaultRandom(),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id, { onDelete: 'cascade' }),
  version: integer('version').notNull(),
  kind: text('kind').notNull(),
  params: jsonb('params').$type<Record<string, unknown>>().notNull(),
  validFrom: timestamp('valid_from', { withTimezone: true }).notNull(),
  note: text('note'),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
}, t => [uniqueIndex('geometry_versions_instrument_version_idx').on(t.instrumentId, t.version), index('geometry_versions_valid_idx').on(t.instrumentId, t.validFrom)])

/** Calibrations are versioned the same way; `fit` holds the engine's CalibrationFit. */
export const calibrations = pgTable('calibrations', {
  id: uuid('id').primaryKey().defaultRandom(),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id, { onDelete: 'cascade' }),
  version: integer('version').notNull(),
  fit: jsonb('fit').$type<Record<string, unknown>>().notNull(),
  points: jsonb('points').$type<Record<string, unknown>[]>().notNull(),
  validFrom: timestamp('valid_from', { withTimezone: true }).notNull(),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
}, t => [uniqueIndex('calibrations_instrument_version_idx').on(t.instrumentId, t.version)])

export const apiKeys = pgTable('api_keys', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  name: text('name').notNull(),
  // The first characters of the secret, shown in lists to tell keys apart.
  prefix: text('prefix').notNull().unique(),
  secretHash: text('secret_hash').notNull(),
  scopes: text('scopes').array().notNull(),
  expiresAt: timestamp('expires_at', { withTimezone: true }),
  revokedAt: timestamp('revoked_at', { withTimezone: true }),
  lastUsedAt: timestamp('last_used_at', { withTimezone: true }),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
})

export const acquisitionStatusEnum = pgEnum('acquisition_status', ['processed', 'failed'])

export const acquisitions = pgTable('acquisitions', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id),
  externalId: text('external_id').notNull(),
  acquiredAt: timestamp('acquired_at', { withTimezone: true }).notNull(),
  sampleRef: text('sample_ref'),
  status: acquisitionStatusEnum('status').notNull(),
  // SHA-256 of the canonical body, to tell a replay from a different body under one run id.
  bodyHash: text('body_hash').notNull(),
  payload: jsonb('payload').$type<Record<string, unknown>>().notNull(),
  pointCount: integer('point_count').notNull(),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('acquisitions_lab_external_idx').on(t.labId, t.externalId),
  index('acquisitions_lab_created_idx').on(t.labId, t.createdAt, t.id),
  index('acquisitions_lab_acquired_idx').on(t.labId, t.acquiredAt, t.id),
])

export const results = pgTable('results', {
  id: uuid('id').primaryKey().defaultRandom(),
  acquisitionId: uuid('acquisition_id').notNull().references(() => acquisitions.id, { onDelete: 'cascade' }),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  geometryVersionId: uuid('geometry_version_id').notNull().references(() => geometryVersions.id),
  calibrationId: uuid('calibration_id').references(() => calibrations.id),
  engineVersion: text('engine_version').notNull(),
  summary: jsonb('summary').$type<Record<string, unknown>>().notNull(),
  supersededBy: uuid('superseded_by'),
  createdAt: createdAt(),
}, t => [index('results_acquisition_idx').on(t.acquisitionId)])

/** Peaks, one row each, indexed by m/z for queries across labs. */
export const peaks = pgTable('peaks', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  resultId: uuid('result_id').notNull().references(() => results.id, { onDelete: 'cascade' }),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  mz: doublePrecision('mz').notNull(),
  area: doublePrecision('area').notNull(),
  species: text('species'),
  charge: integer('charge'),
}, t => [index('peaks_mz_idx').on(t.mz), index('peaks_result_idx').on(t.resultId)])

/** The outbox: one event per accepted result, numbered per lab for ordering. */
export const events = pgTable('events', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  sequence: bigint('sequence', { mode: 'number' }).notNull(),
  type: text('type').notNull(),
  payload: jsonb('payload').$type<Record<string, unknown>>().notNull(),
  createdAt: createdAt(),
}, t => [uniqueIndex('events_lab_sequence_idx').on(t.labId, t.sequence), index('events_created_idx').on(t.createdAt, t.id)])

/** Stored answers for Idempotency-Key (IETF draft-ietf-httpapi-idempotency-key-header). */
export const idempotencyKeys = pgTable('idempotency_keys', {
  apiKeyId: uuid('api_key_id').notNull().references(() => apiKeys.id, { onDelete: 'cascade' }),
  key: text('key').notNull(),
  requestHash: text('request_hash').notNull(),
  state: text('state').$type<'in-flight' | 'done'>().notNull(),
  responseStatus: integer('response_status'),
  responseBody: jsonb('response_body'),
  createdAt: createdAt(),
}, t => [primaryKey({ columns: [t.apiKeyId, t.key] })])

// ── Partners: OAuth clients, grants, signing keys ───────────────────────────────────────

/** OAuth 2.0 client credentials of a partner (RFC 6749 §4.4); only the secret's SHA-256 is kept. */
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

// ── Exchange schemas ────────────────────────────────────────────────────────────────────

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

// ── Webhooks: endpoints, the delivery queue and its attempts ────────────────────────────

export const endpointStatusEnum = pgEnum('endpoint_status', ['active', 'paused', 'disabled'])

/** A partner's webhook endpoint; its signing secret (`whsec_…`) is sealed at rest. */
export const webhookEndpoints = pgTable('webhook_endpoints', {
  id: uuid('id').primaryKey().defaultRandom(),
  partnerId: uuid('partner_id').notNull().references(() => partners.id),
  url: text('url').notNull(),
  description: text('description').notNull().default(''),
  eventTypes: text('event_types').array().notNull(),
  // Labs whose events go here; empty means every lab that grants the partner.
  labIds: uuid('lab_ids').array().notNull().default(sql`'{}'::uuid[]`),
  schemaVersion: integer('schema_version').notNull().default(1),
  status: endpointStatusEnum('status').notNull().default('active'),
  disabledReason: text('disabled_reason'),
  sealedSecret: text('sealed_secret').notNull(),
  // During a rotation the previous secret signs beside the new one until this time.
  previousSealedSecret: text('previous_sealed_secret'),
  previousSecretUntil: timestamp('previous_secret_until', { withTimezone: true }),
  // Start of the current run of failures (null after a success).
  failingSince: timestamp('failing_since', { withTimezone: true }),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
}, t => [index('webhook_endpoints_partner_idx').on(t.partnerId)])

export const deliveryStatusEnum = pgEnum('delivery_status', ['pending', 'succeeded', 'dead'])

/**
 * The durable delivery queue: one row per event and endpoint, written in the transaction
 * that records the event. Workers claim due rows with SKIP LOCKED and a lease.
 */
export const deliveries = pgTable('deliveries', {
  id: uuid('id').primaryKey().defaultRandom(),
  endpointId: uuid('endpoint_id').notNull().references(() => webhookEndpoints.id, { onDelete: 'cascade' }),
  // Null for a test message, whose payload is kept here instead.
  eventId: uuid('event_id').references(() => events.id),
  eventType: text('event_type').notNull(),
  testPayload: jsonb('test_payload').$type<Record<string, unknown>>(),
  status: deliveryStatusEnum('status').notNull().default('pending'),
  // Set when someone asks for a replay: the next attempt is marked as one.
  replayRequested: boolean('replay_requested').notNull().default(false),
  attempts: integer('attempts').notNull().default(0),
  nextAttemptAt: timestamp('next_attempt_at', { withTimezone: true }).notNull().defaultNow(),
  leaseOwner: text('lease_owner'),
  leaseUntil: timestamp('lease_until', { withTimezone: true }),
  lastClass: text('last_class'),
  lastStatusCode: integer('last_status_code'),
  createdAt: createdAt(),
  finishedAt: timestamp('finished_at', { withTimezone: true }),
}, t => [
  // The claim walks each active endpoint's due deliveries in time order, so its cost follows
  // the number of endpoints rather than the backlog (a paused endpoint's pile is never read).
  index('deliveries_endpoint_due_idx').on(t.endpointId, t.nextAttemptAt).where(sql`status = 'pending'`),
  index('deliveries_endpoint_idx').on(t.endpointId, t.createdAt),
  uniqueIndex('deliveries_event_endpoint_idx').on(t.eventId, t.endpointId),
])

/** Every attempt of a delivery, as the log and the console show it. */
export const deliveryAttempts = pgTable('delivery_attempts', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  deliveryId: uuid('delivery_id').notNull().references(() => deliveries.id, { onDelete: 'cascade' }),
  number: integer('number').notNull(),
  at: timestamp('at', { withTimezone: true }).notNull().defaultNow(),
  durationMs: integer('duration_ms').notNull(),
  class: text('class').notNull(),
  statusCode: integer('status_code'),
  error: text('error'),
  responseExcerpt: text('response_excerpt'),
  requestHeaders: jsonb('request_headers').$type<Record<string, string>>().notNull(),
  // Null when the attempt sent its event's whole message, which is rebuilt from the event when
  // shown rather than stored again with every attempt (a thin or test message is stored).
  requestBody: text('request_body'),
  replay: boolean('replay').notNull().default(false),
}, t => [index('delivery_attempts_delivery_idx').on(t.deliveryId, t.number)])

export * from './isotopes'
