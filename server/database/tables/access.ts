import { sql } from 'drizzle-orm'
import { check, index, integer, pgEnum, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core'
import { roles } from '../../../shared/types/roles'
import { createdAt, updatedAt } from './columns'
import { labs, partners } from './orgs'

export const roleEnum = pgEnum('role', roles)

export const userStatusEnum = pgEnum('user_status', ['active', 'disabled'])

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
  check('users_role_scope', sql`(${t.role}::text in ('lab_manager', 'lab_reviewer')) = (${t.labId} is not null) and (${t.role} = 'integrator') = (${t.partnerId} is not null)`),
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

export const rateLimits = pgTable('rate_limits', {
  key: text('key').primaryKey(),
  points: integer('points').notNull().default(0),
  expire: timestamp('expire', { withTimezone: true }),
})




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
