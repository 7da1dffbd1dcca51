import { bigint, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core'
import { partnerKinds } from '../../../shared/schemas/orgs'
import { createdAt, updatedAt } from './columns'

export const partnerKindEnum = pgEnum('partner_kind', partnerKinds)

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
