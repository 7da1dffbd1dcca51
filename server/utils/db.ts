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
    database = drizzle(preparedStatements(client), { schema })
  }
  return database
}

/** The postgres.js client under Drizzle, for code shared with the commands (server/services/store/maintenance.ts). */
export function useSql(): postgres.Sql {
  useDb()
  return preparedStatements(client!)
}

type Callback = (sql: postgres.Sql) => unknown

/**
 * Drizzle's postgres.js driver runs every query through `unsafe()` without options, which
 * postgres.js treats as `prepare: false`: each query with parameters is then described
 * before it is bound, two round trips instead of one (drizzle-orm issue #6096, open in
 * 0.45.x). This view of the client asks for named statements, which postgres.js caches per
 * connection, in transactions and savepoints too. bench:ingest measured the difference.
 */
function preparedStatements(sql: postgres.Sql): postgres.Sql {
  return new Proxy(sql, {
    get(target, prop, receiver) {
      if (prop === 'unsafe') {
        return (query: string, params?: unknown[], options?: postgres.UnsafeQueryOptions) =>
          target.unsafe(query, params as postgres.ParameterOrJSON<never>[], { ...options, prepare: true })
      }
      if (prop === 'begin' || prop === 'savepoint') {
        return (...args: unknown[]) => {
          const fn = args.pop() as Callback
          const open = Reflect.get(target, prop) as (...a: unknown[]) => unknown
          return open.apply(target, [...args, (tx: postgres.Sql) => fn(preparedStatements(tx))])
        }
      }
      return Reflect.get(target, prop, receiver)
    },
  })
}

/**
 * Calls `onMessage` with the payload of every NOTIFY on `channel`, on a connection of its own;
 * `onListen` runs each time that connection is (re)established, when messages sent while it
 * was down are lost.
 */
export function listenDb(channel: string, onMessage: (payload: string) => void, onListen: () => void) {
  useDb()
  return client!.listen(channel, onMessage, onListen)
}

export async function closeDb() {
  await client?.end({ timeout: 5 })
  client = undefined
  database = undefined
}

/**
 * The SQLSTATE of a failed statement (e.g. '23505', unique violation). Drizzle wraps the
 * driver's error in its own (DrizzleQueryError) with the original as `cause`.
 */
export function pgErrorCode(error: unknown): string | undefined {
  const e = error as { code?: unknown, cause?: { code?: unknown } } | null
  const code = e?.code ?? e?.cause?.code
  return typeof code === 'string' ? code : undefined
}

/** The one row a statement must return (an INSERT … RETURNING, an aggregate). */
export function firstRow<R extends readonly unknown[]>(rows: R): R[number] {
  const row = rows[0]
  if (row === undefined) throw new Error('expected a row from the database')
  return row
}
