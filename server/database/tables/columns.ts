import { timestamp } from 'drizzle-orm/pg-core'

// The timestamp columns most tables carry.
export const createdAt = () => timestamp('created_at', { withTimezone: true }).notNull().defaultNow()
export const updatedAt = () => timestamp('updated_at', { withTimezone: true }).notNull().defaultNow()
