import { sql } from 'drizzle-orm'
import { boolean, foreignKey, index, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { certificateSubjects, reprocessItemStates, reprocessJobStates } from '../../../shared/schemas/lifecycle'
import { createdAt } from './columns'
import { instruments } from './instruments'
import { labs } from './orgs'
import { acquisitions, results } from './results'

// The result lifecycle (issue 20): reprocessing jobs with their items, and the certificates
// of analysis issued for released results and sequences.

export const reprocessJobStateEnum = pgEnum('reprocess_job_state', reprocessJobStates)
export const reprocessItemStateEnum = pgEnum('reprocess_item_state', reprocessItemStates)
export const certificateSubjectEnum = pgEnum('certificate_subject', certificateSubjects)

/**
 * A durable reprocessing job: the acquisitions it covers are listed in reprocess_items when
 * the job is created, so a worker killed mid-way resumes from the first pending item (items
 * are done exactly once: an item's new result and its 'done' mark commit together). One
 * queued or running job per instrument at a time.
 */
export const reprocessJobs = pgTable('reprocess_jobs', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id, { onDelete: 'cascade' }),
  // What was asked for (instrument, time range, sequence, method version), as given.
  selection: jsonb('selection').$type<Record<string, unknown>>().notNull(),
  reason: text('reason').notNull(),
  state: reprocessJobStateEnum('state').notNull().default('queued'),
  total: integer('total').notNull().default(0),
  processed: integer('processed').notNull().default(0),
  changed: integer('changed').notNull().default(0),
  failed: integer('failed').notNull().default(0),
  createdBy: uuid('created_by'),
  // The worker holding the job and until when; an expired lease lets another take it over.
  leaseOwner: text('lease_owner'),
  leaseUntil: timestamp('lease_until', { withTimezone: true }),
  error: text('error'),
  startedAt: timestamp('started_at', { withTimezone: true }),
  finishedAt: timestamp('finished_at', { withTimezone: true }),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('reprocess_jobs_one_per_instrument_idx').on(t.instrumentId).where(sql`${t.state} in ('queued', 'running')`),
  index('reprocess_jobs_lab_created_idx').on(t.labId, t.createdAt),
  index('reprocess_jobs_state_idx').on(t.state, t.createdAt),
])

export const reprocessItems = pgTable('reprocess_items', {
  jobId: uuid('job_id').notNull().references(() => reprocessJobs.id, { onDelete: 'cascade' }),
  acquisitionId: uuid('acquisition_id').notNull(),
  // The acquisition's created_at (its month): the key of the composite foreign keys below; the
  // old and new results are versions of that acquisition, so they share it.
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }).notNull(),
  ord: integer('ord').notNull(),
  state: reprocessItemStateEnum('state').notNull().default('pending'),
  oldResultId: uuid('old_result_id'),
  newResultId: uuid('new_result_id'),
  // Whether anything a partner would see changed (m/z, ratios, δ, flags); unchanged items write no new version.
  changed: boolean('changed'),
  error: text('error'),
  doneAt: timestamp('done_at', { withTimezone: true }),
}, t => [
  primaryKey({ columns: [t.jobId, t.acquisitionId] }),
  index('reprocess_items_pending_idx').on(t.jobId, t.state, t.ord),
  foreignKey({ name: 'reprocess_items_acquisition_fk', columns: [t.acquisitionId, t.acquisitionCreatedAt], foreignColumns: [acquisitions.id, acquisitions.createdAt] }).onDelete('cascade'),
  foreignKey({ name: 'reprocess_items_old_result_fk', columns: [t.oldResultId, t.acquisitionCreatedAt], foreignColumns: [results.id, results.acquisitionCreatedAt] }),
  foreignKey({ name: 'reprocess_items_new_result_fk', columns: [t.newResultId, t.acquisitionCreatedAt], foreignColumns: [results.id, results.acquisitionCreatedAt] }),
])

/**
 * A certificate of analysis: the canonical JSON of the released result or sequence it
 * certifies, kept byte for byte, and its detached JWS (RFC 7515 appendix F) signed with a
 * key of the hub's JWKS. Issued once per released version; a correction gets a new one.
 */
export const certificates = pgTable('certificates', {
  id: uuid('id').primaryKey().defaultRandom(),
  // Human-readable number printed on the PDF, unique across the hub.
  number: text('number').notNull().unique(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  subject: certificateSubjectEnum('subject').notNull(),
  subjectId: uuid('subject_id').notNull(),
  canonical: text('canonical').notNull(),
  jws: text('jws').notNull(),
  kid: text('kid').notNull(),
  issuedBy: uuid('issued_by'),
  issuedAt: timestamp('issued_at', { withTimezone: true }).notNull().defaultNow(),
}, t => [
  uniqueIndex('certificates_subject_idx').on(t.subject, t.subjectId),
  index('certificates_lab_idx').on(t.labId, t.issuedAt),
])
