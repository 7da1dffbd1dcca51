import { drizzle, type PostgresJsDatabase } from 'drizzle-orm/postgres-js'
import postgres from 'postgres'
import * as schema from '../database/schema'

export type Database = PostgresJsDatabase<typeof schema>
export type Transaction = Parameters<Parameters<Database['transaction']>[0]>[0]
/** A handle that can run queries: the pool or an open transaction. */
export type Queryable = Database | Transaction

let client: postgres.Sql | undefined
let database: Database | undefined

/** The process's one database client, made on first use. */
export function useDb(): Database {
  if (!database) {
    const url = useRuntimeConfig().databaseUrl || process.env.DATABASE_URL
    if (!url) throw new Error('NUXT_DATABASE_URL is not set')
    client = postgres(url, { max: 20, onnotice: () => {}, connection: { application_name: 'arcwise' } })
    database = drizzle(client, { schema })
  }
  return database
}

export async function closeDb() {
  await client?.end({ timeout: 5 })
  client = undefined
  database = undefined
}

/** The one row a statement must return (an INSERT … RETURNING, an aggregate). */
export function firstRow<R extends readonly unknown[]>(rows: R): R[number] {
  const row = rows[0]
  if (row === undefined) throw new Error('expected a row from the database')
  return row
}
