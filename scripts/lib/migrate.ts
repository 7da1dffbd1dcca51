import { drizzle } from 'drizzle-orm/postgres-js'
import { migrate } from 'drizzle-orm/postgres-js/migrator'
import postgres from 'postgres'
import { join } from 'node:path'
import { root } from './paths'

/** Applies the committed migrations in drizzle/ (never `drizzle-kit push`). */
export async function applyMigrations(url: string) {
  const sql = postgres(url, { max: 1, onnotice: () => {} })
  try { await migrate(drizzle(sql), { migrationsFolder: join(root, 'drizzle') }) }
  finally { await sql.end() }
}
