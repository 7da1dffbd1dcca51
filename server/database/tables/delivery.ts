import { sql } from 'drizzle-orm'
import { bigserial, boolean, doublePrecision, foreignKey, index, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { createdAt, updatedAt } from './columns'
import { users } from './access'
import { partners } from './orgs'
import { events } from './results'

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
  // Fairness (issue 22). Sends in flight at once to this endpoint, across every worker
  // process; null takes the hub's default (`webhooks.endpointInFlight`).
  maxInFlight: integer('max_in_flight'),
  // Sends per second at most (null: no limit), kept by a generic cell rate algorithm whose
  // theoretical arrival time is `rateNextAt` (ITU-T I.371, as in ATM traffic policing).
  ratePerSecond: doublePrecision('rate_per_second'),
  rateNextAt: timestamp('rate_next_at', { withTimezone: true }),
  // Deliveries one at a time in the order their events were recorded: the next waits until
  // the one before succeeds or dies.
  ordered: boolean('ordered').notNull().default(false),
  // Nothing is sent before this time: a Retry-After (429, 503), or the circuit's next probe.
  blockedUntil: timestamp('blocked_until', { withTimezone: true }),
  // Failed first tries since the last success (a retry's failure is no news about the
  // endpoint, except an ordered one's; delivery/record.ts, endpointHealth); at
  // `webhooks.circuitFailures` the circuit opens and one delivery probes the endpoint before
  // the backlog is sent.
  consecutiveFailures: integer('consecutive_failures').notNull().default(0),
  createdBy: uuid('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: createdAt(),
  updatedAt: updatedAt(),
}, t => [index('webhook_endpoints_partner_idx').on(t.partnerId)])

export const deliveryStatusEnum = pgEnum('delivery_status', ['pending', 'succeeded', 'dead'])

/**
 * The durable delivery queue: one row per event and endpoint, written in the transaction
 * that records the event. Workers claim due rows with SKIP LOCKED and a lease.
 *
 * Partitioned by month of `created_at` (drizzle/0019_monthly-partitions.sql; the partitions
 * are made and dropped by server/services/partitions): a primary key of a partitioned table
 * must hold the partition key, so it is (id, created_at); `id` alone stays what partners see
 * (the webhook-id) and is found through each month's primary key index.
 */

export const deliveries = pgTable('deliveries', {
  id: uuid('id').notNull().defaultRandom(),
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
  // An endpoint's sends in flight (leased rows), counted by every claim for its in-flight limit.
  index('deliveries_endpoint_leased_idx').on(t.endpointId, t.leaseUntil).where(sql`status = 'pending' and lease_until is not null`),
  // An ordered endpoint's next delivery: its oldest waiting one.
  index('deliveries_endpoint_order_idx').on(t.endpointId, t.createdAt).where(sql`status = 'pending'`),
  index('deliveries_endpoint_idx').on(t.endpointId, t.createdAt),
  // One delivery per event and endpoint. A unique index of a partitioned table must hold the
  // partition key; an event's deliveries are all written by the one statement that records it
  // (delivery/endpoints.ts), in one transaction, so they share its created_at.
  uniqueIndex('deliveries_event_endpoint_idx').on(t.eventId, t.endpointId, t.createdAt),
  primaryKey({ name: 'deliveries_id_created_at_pk', columns: [t.id, t.createdAt] }),
])

/**
 * Every attempt of a delivery, as the log and the console show it. Partitioned by its
 * delivery's month (`delivery_created_at`, part of the foreign key), not by `at`: a delivery's
 * attempts, a replay's months later too, sit in the same month as the delivery, so a month of
 * attempts is dropped with or before its deliveries and never leaves a delivery half-recorded.
 */

export const deliveryAttempts = pgTable('delivery_attempts', {
  id: bigserial('id', { mode: 'number' }).notNull(),
  deliveryId: uuid('delivery_id').notNull(),
  deliveryCreatedAt: timestamp('delivery_created_at', { withTimezone: true }).notNull(),
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
}, t => [
  index('delivery_attempts_delivery_idx').on(t.deliveryId, t.number),
  primaryKey({ name: 'delivery_attempts_id_delivery_created_at_pk', columns: [t.id, t.deliveryCreatedAt] }),
  foreignKey({ name: 'delivery_attempts_delivery_fk', columns: [t.deliveryId, t.deliveryCreatedAt], foreignColumns: [deliveries.id, deliveries.createdAt] }).onDelete('cascade'),
])
