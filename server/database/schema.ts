import { sql } from 'drizzle-orm'
import { bigserial, check, index, integer, jsonb, pgEnum, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core'
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

export const schemaTables = { labs, partners, users, invitations, passwordResetTokens, auditLog, mailOutbox, rateLimits }
