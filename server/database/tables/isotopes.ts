import { sql } from 'drizzle-orm'
import { bigserial, boolean, check, doublePrecision, foreignKey, index, integer, jsonb, pgEnum, pgTable, primaryKey, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import type { MethodDefinition } from '../../../shared/schemas/methods'
import type { Measured, SequenceOutcome, SequenceRole } from '../../../shared/engine/isotopes/types'
import { createdAt } from './columns'
import { instruments } from './instruments'
import { acquisitions, reviewStateEnum } from './results'
import { labs, releasePolicyEnum } from './orgs'

// The isotope workflow: reference materials, each lab's working standards, methods per
// instrument, sequences of acquisitions with roles, and the control-chart points of the
// standards measured in them (issue 19).


/**
 * International reference materials with their assigned values (seeded at start from the
 * engine's registry, which names each value's source and marks values typed from memory).
 */
export const referenceMaterials = pgTable('reference_materials', {
  id: text('id').primaryKey(),
  name: text('name').notNull(),
  /** Quantity ("δ13C", "40Ar/36Ar") → assigned value and standard uncertainty, with its scale. */
  values: jsonb('values').$type<Record<string, Measured & { scale?: string }>>().notNull(),
  source: text('source').notNull(),
  fromMemory: boolean('from_memory').notNull().default(false),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
})

/**
 * A lab's working standard (its own material, calibrated against reference materials): every
 * recalibration is a new version with its own validity.
 */
export const workingStandards = pgTable('working_standards', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  /** The lab's name for it, as sequences cite it ("LAB-CARB-1"). */
  code: text('code').notNull(),
  version: integer('version').notNull(),
  name: text('name').notNull(),
  values: jsonb('values').$type<Record<string, Measured>>().notNull(),
  calibratedAgainst: text('calibrated_against').array().notNull(),
  validFrom: timestamp('valid_from', { withTimezone: true }).notNull(),
  validTo: timestamp('valid_to', { withTimezone: true }),
  note: text('note'),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('working_standards_lab_code_version_idx').on(t.labId, t.code, t.version),
  index('working_standards_valid_idx').on(t.labId, t.code, t.validFrom),
])

/** A method per instrument, versioned: the definition is shared/schemas/methods.ts's shape. */
export const methods = pgTable('methods', {
  id: uuid('id').primaryKey().defaultRandom(),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id, { onDelete: 'cascade' }),
  version: integer('version').notNull(),
  name: text('name').notNull(),
  definition: jsonb('definition').$type<MethodDefinition>().notNull(),
  validFrom: timestamp('valid_from', { withTimezone: true }).notNull(),
  note: text('note'),
  // Overrides the lab's release policy for sequences processed under this method (null: the lab's).
  releasePolicy: releasePolicyEnum('release_policy'),
  // Who registered this version: the four-eyes rule's "last changed its method".
  createdBy: uuid('created_by'),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('methods_instrument_version_idx').on(t.instrumentId, t.version),
  index('methods_valid_idx').on(t.instrumentId, t.validFrom),
])

export const sequenceStatusEnum = pgEnum('sequence_status', ['open', 'closed', 'processed', 'failed'])

/** An ordered set of acquisitions with roles, processed as a whole once closed. */
export const sequences = pgTable('sequences', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id),
  /** The lab's own id for the sequence, unique per lab. */
  externalId: text('external_id').notNull(),
  declaredLength: integer('declared_length'),
  status: sequenceStatusEnum('status').notNull().default('open'),
  /** A method version the lab asked for; otherwise the one in force at the first acquisition. */
  requestedMethodVersion: integer('requested_method_version'),
  methodId: uuid('method_id').references(() => methods.id),
  /** SHA-256 of the opening request, to tell a replay from another sequence under one id. */
  bodyHash: text('body_hash').notNull(),
  outcome: jsonb('outcome').$type<SequenceOutcome>(),
  /** Why processing failed, for a failed sequence. */
  failure: jsonb('failure').$type<{ code: string, message: string, field?: string }>(),
  /** A control-chart rule was violated by a standard of this sequence. */
  flagged: boolean('flagged').notNull().default(false),
  // Review before release, as for results (server/database/tables/results.ts): partners see a
  // sequence's outcome (sequence.processed) only once released.
  reviewState: reviewStateEnum('review_state').notNull().default('held'),
  reviewedBy: uuid('reviewed_by'),
  reviewedAt: timestamp('reviewed_at', { withTimezone: true }),
  reviewComment: text('review_comment'),
  releasedAt: timestamp('released_at', { withTimezone: true }),
  retractedBy: uuid('retracted_by'),
  retractedAt: timestamp('retracted_at', { withTimezone: true }),
  retractionReason: text('retraction_reason'),
  closedAt: timestamp('closed_at', { withTimezone: true }),
  processedAt: timestamp('processed_at', { withTimezone: true }),
  createdAt: createdAt(),
}, t => [
  uniqueIndex('sequences_lab_external_idx').on(t.labId, t.externalId),
  index('sequences_lab_created_idx').on(t.labId, t.createdAt, t.id),
  index('sequences_instrument_idx').on(t.instrumentId, t.createdAt),
  check('sequences_declared_length', sql`${t.declaredLength} is null or ${t.declaredLength} between 1 and 2000`),
])

/** An acquisition's place in its sequence. */
export const sequenceItems = pgTable('sequence_items', {
  sequenceId: uuid('sequence_id').notNull().references(() => sequences.id, { onDelete: 'cascade' }),
  position: integer('position').notNull(),
  acquisitionId: uuid('acquisition_id').notNull(),
  // The acquisition's created_at (its month), for the composite foreign key.
  acquisitionCreatedAt: timestamp('acquisition_created_at', { withTimezone: true }).notNull(),
  role: text('role').$type<SequenceRole>().notNull(),
  /** Working or monitoring standards: the reference material's id or the lab's standard code. */
  material: text('material'),
  createdAt: createdAt(),
}, t => [
  primaryKey({ columns: [t.sequenceId, t.position] }),
  // An acquisition belongs to one sequence at most.
  uniqueIndex('sequence_items_acquisition_idx').on(t.acquisitionId),
  foreignKey({ name: 'sequence_items_acquisition_fk', columns: [t.acquisitionId, t.acquisitionCreatedAt], foreignColumns: [acquisitions.id, acquisitions.createdAt] }),
])

/** One standard's measured value against its accepted value: a point of a control chart. */
export const controlPoints = pgTable('control_points', {
  id: bigserial('id', { mode: 'number' }).primaryKey(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  instrumentId: uuid('instrument_id').notNull().references(() => instruments.id, { onDelete: 'cascade' }),
  material: text('material').notNull(),
  quantity: text('quantity').notNull(),
  at: timestamp('at', { withTimezone: true }).notNull(),
  value: doublePrecision('value').notNull(),
  accepted: doublePrecision('accepted').notNull(),
  u: doublePrecision('u').notNull(),
  sequenceId: uuid('sequence_id').references(() => sequences.id, { onDelete: 'set null' }),
  position: integer('position'),
  /** The rules this point broke when it was added (e.g. "1-3s", "cusum-upper"). */
  violations: text('violations').array().notNull().default(sql`'{}'::text[]`),
  createdAt: createdAt(),
}, t => [
  index('control_points_chart_idx').on(t.instrumentId, t.material, t.quantity, t.at),
  index('control_points_sequence_idx').on(t.sequenceId),
])
