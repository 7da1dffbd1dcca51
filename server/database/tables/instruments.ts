import { index, integer, jsonb, pgTable, text, timestamp, uniqueIndex, uuid } from 'drizzle-orm/pg-core'
import { createdAt, updatedAt } from './columns'
import { users } from './access'
import { labs } from './orgs'

export const instruments = pgTable('instruments', {
  id: uuid('id').primaryKey().defaultRandom(),
  labId: uuid('lab_id').notNull().references(() => labs.id),
  slug: text('slug').notNull(),
  name: text('name').notNull(),
  // The species this instrument measures (engine species labels): assignment considers no
  // other candidate unless an acquisition names its own list. Null: every candidate.
  measuredSpecies: text('measured_species').array(),
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
