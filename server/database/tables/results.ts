import { sql } from 'drizzle-orm'
import { bigint, bigserial, doublePrecision, foreignKey, index, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { reviewStates } from '../../../shared/schemas/lifecycle'
import { createdAt } from './columns'
import { calibrations, geometryVersions, instruments } from './instruments'
import { labs } from './orgs'

export const acquisitionStatusEnum = pgEnum('acquisition_status', ['processed', 'failed'])
export const reviewStateEnum = pgEnum('review_state', reviewStates)

// Acquisitions and results are partitioned by month (issue 23; drizzle/0021_acquisition-
// partitions.sql, server/services/partitions): acquisitions by created_at, results by their
// acquisition's created_at, so an acquisition and all its versions share a month. Their primary
// keys carry the partition key, and every table pointing at them carries the acquisition's
// created_at in a composite foreign key. Ids stay unique (random UUIDs; a lookup by id alone
// probes each month's primary key index).
export const acquisitions = pgTable('acquisitions', {
  id: uuid('id').notNull().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id),
  externalId: text('external_id').notNull(),
  acquiredAt: timestamp('acquired_at', { withTimezone: true }).notNull(),
  sampleRef: text('sample_ref'),
  status: acquisitionStatusEnum('status').notNull(),
  // SHA-256 of the canonical body, to tell a replay from a different body under one run id.
  bodyHash: text('body_hash').notNull(),
  // The body as JSON, for rows from before the object store (and with the store off). With
  // the store on it is null and the row references two objects by SHA-256 (server/services/
  // store): raw/<rawSha256>, the body as the lab sent it, and arrays/<arraysSha256>, the
  // parsed body with its arrays as float64.
  payload: jsonb('payload').$type<Record<string, unknown>>(),
  rawSha256: text('raw_sha256'),
  rawBytes: bigint('raw_bytes', { mode: 'number' }),
  rawContentType: text('raw_content_type'),
  arraysSha256: text('arrays_sha256'),
  arraysBytes: bigint('arrays_bytes', { mode: 'number' }),
  // When the lab's retention removed the raw data (results stay).
  rawRemovedAt: timestamp('raw_removed_at', { withTimezone: true }),
  pointCount: integer('point_count').notNull(),
  // The console user who uploaded it (null for lab-system posts with an API key): the four-eyes rule.
  submittedBy: uuid('submitted_by'),
  // The id of the request that posted it (X-Request-Id, or the one the hub made): the worker's
  // log lines about its deliveries carry it, so an operator can follow it through the logs.
  requestId: text('request_id'),
  createdAt: createdAt(),
}, t => [
  primaryKey({ name: 'acquisitions_id_created_at_pk', columns: [t.id, t.createdAt] }),
  // A lab's run ids are unique across months in acquisition_runs (below): a unique index on
  // a partitioned table must hold the partition key.
  index('acquisitions_lab_created_idx').on(t.labId, t.createdAt, t.id),
  index('acquisitions_lab_acquired_idx').on(t.labId, t.acquiredAt, t.id),
  index('acquisitions_raw_sha_idx').on(t.rawSha256),
  index('acquisitions_arrays_sha_idx').on(t.arraysSha256),
])

export const results = pgTable('results', {
  id: uuid('id').notNull().defaultRandom(),
  acquisitionId: uuid('acquisition_id').notNull(),
  // The acquisition's created_at: the partition key (a result lives in its acquisition's month).
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }).notNull(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  geometryVersionId: uuid('geometry_version_id').notNull().references(() => geometryVersions.id),
  calibrationId: uuid('calibration_id').references(() => calibrations.id),
  engineVersion: text('engine_version').notNull(),
  summary: jsonb('summary').$type<Record<string, unknown>>().notNull(),
  // Lineage: results are never overwritten. Reprocessing writes version n+1 with `supersedes`
  // naming version n and sets n's `supersededBy`. Partners see an acquisition's latest
  // version whose review state is released or retracted.
  version: integer('version').notNull().default(1),
  // Same acquisition, so same acquisition_created_at (the composite foreign key below).
  supersedes: uuid('supersedes'),
  supersededBy: uuid('superseded_by'),
  // Why this version exists when it corrects a released one (shown to partners in result.corrected).
  correctionReason: text('correction_reason'),
  reprocessJobId: uuid('reprocess_job_id'),
  reviewState: reviewStateEnum('review_state').notNull().default('held'),
  // Who decided (null with automatic release), when, and what they wrote.
  reviewedBy: uuid('reviewed_by'),
  reviewedAt: timestamp('reviewed_at', { withTimezone: true }),
  reviewComment: text('review_comment'),
  releasedAt: timestamp('released_at', { withTimezone: true }),
  retractedBy: uuid('retracted_by'),
  retractedAt: timestamp('retracted_at', { withTimezone: true }),
  retractionReason: text('retraction_reason'),
  createdAt: createdAt(),
}, t => [
  primaryKey({ name: 'results_id_acquisition_created_at_pk', columns: [t.id, t.acquisitionCreatedAt] }),
  foreignKey({ name: 'results_acquisition_fk', columns: [t.acquisitionId, t.acquisitionCreatedAt], foreignColumns: [acquisitions.id, acquisitions.createdAt] }).onDelete('cascade'),
  foreignKey({ name: 'results_supersedes_fk', columns: [t.supersedes, t.acquisitionCreatedAt], foreignColumns: [t.id, t.acquisitionCreatedAt] }),
  uniqueIndex('results_acquisition_version_idx').on(t.acquisitionId, t.version, t.acquisitionCreatedAt),
  index('results_lab_review_idx').on(t.labId, t.reviewState, t.createdAt),
])

/** Peaks, one row each, indexed by m/z for queries across labs. */

export const peaks = pgTable('peaks', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  resultId: uuid('result_id').notNull(),
  // The result's acquisition_created_at (peaks are not partitioned; the foreign key needs it).
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }).notNull(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  mz: doublePrecision('mz').notNull(),
  area: doublePrecision('area').notNull(),
  species: text('species'),
  charge: integer('charge'),
}, t => [
  index('peaks_mz_idx').on(t.mz), index('peaks_result_idx').on(t.resultId),
  foreignKey({ name: 'peaks_result_fk', columns: [t.resultId, t.acquisitionCreatedAt], foreignColumns: [results.id, results.acquisitionCreatedAt] }).onDelete('cascade'),
])

/**
 * A lab's run ids, unique across months (acquisitions are partitioned by month, and a unique
 * index there would have to hold the month). Written in the ingest statement with the
 * acquisition; the replay / 409 check reads it.
 */
export const acquisitionRuns = pgTable('acquisition_runs', {
  labId: uuid('lab_id').notNull(),
  externalId: text('external_id').notNull(),
  acquisitionId: uuid('acquisition_id').notNull(),
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }).notNull(),
}, t => [
  primaryKey({ name: 'acquisition_runs_lab_id_external_id_pk', columns: [t.labId, t.externalId] }),
  // No index by acquisition: acquisitions are never deleted (the cascade would scan), and
  // partition maintenance finds a month's runs by their lab and run id.
  foreignKey({ name: 'acquisition_runs_acquisition_fk', columns: [t.acquisitionId, t.acquisitionCreatedAt], foreignColumns: [acquisitions.id, acquisitions.createdAt] }).onDelete('cascade'),
])

/** The outbox: one event per accepted result, numbered per lab for ordering. */

export const events = pgTable('events', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  sequence: bigint('sequence', { mode: 'number' }).notNull(),
  type: text('type').notNull(),
  payload: jsonb('payload').$type<Record<string, unknown>>().notNull(),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('events_lab_sequence_idx').on(t.labId, t.sequence), index('events_created_idx').on(t.createdAt, t.id),
  // The acquisition an event is about (payload.id): a result's delivery trail and the homes'
  // "how did it arrive" find its events without reading the lab's whole history.
  index('events_subject_idx').on(t.labId, sql`(${t.payload}->>'id')`),
])

/** Stored answers for Idempotency-Key (IETF draft-ietf-httpapi-idempotency-key-header). */
