import { bigserial, index, integer, pgEnum, pgTable, text, timestamp } from 'drizzle-orm/pg-core'
import { createdAt } from './columns'

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
