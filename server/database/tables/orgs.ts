import { sql } from 'drizzle-orm'
import { bigint, boolean, integer, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core'
import { releasePolicies } from '../../../shared/schemas/lifecycle'
import { partnerKinds } from '../../../shared/schemas/orgs'
import { createdAt, updatedAt } from './columns'

export const partnerKindEnum = pgEnum('partner_kind', partnerKinds)
export const releasePolicyEnum = pgEnum('release_policy', releasePolicies)

export const labs = pgTable('labs', {
  id: uuid('id').primaryKey().defaultRandom(),
  slug: text('slug').notNull().unique(),
  name: text('name').notNull(),
  site: text('site').notNull(),
  contactEmail: text('contact_email').notNull(),
  // Last event sequence number handed out for this lab (events are numbered per lab).
  eventSequence: bigint('event_sequence', { mode: 'number' }).notNull().default(0),
  // Review before release (ISO/IEC 17025:2017 §7.8.1: results are reviewed and authorised
  // before release). 'review' holds every result; 'auto' releases a result whose QC flags
  // are all in autoReleaseAllows (codes the lab accepts without a person, e.g. 'uncalibrated'
  // for a leak-test lab), and holds the rest.
  releasePolicy: releasePolicyEnum('release_policy').notNull().default('review'),
  autoReleaseAllows: text('auto_release_allows').array().notNull().default(sql`'{}'::text[]`),
  // Four eyes: whoever submitted a result (or last changed its method) may not release it.
  fourEyes: boolean('four_eyes').notNull().default(false),
  // Days the raw data (the body as sent, the parsed arrays) is kept after an acquisition is
  // received; null keeps it forever. Results and their numbers are kept either way (issue 23).
  rawRetentionDays: integer('raw_retention_days'),
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
