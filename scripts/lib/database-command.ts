// The frame every database command shares (store:migrate, store:retention, keys:rotate):
// with DATABASE_URL it works on that database; without, it starts the local cluster of
// `npm start` and works on its `arcwise` database. One connection; a failure is printed
// as its message and ends the command with exit code 1; the cluster and any other
// resource the command opened (`cleanup`) are released in every case.
import postgres from 'postgres'
import { ensureDatabase, startCluster } from './pg'

export interface DatabaseCommandContext {
  sql: postgres.Sql
  /** True when DATABASE_URL named the database (not the local cluster). */
  external: boolean
}

export async function runDatabaseCommand(
  work: (context: DatabaseCommandContext) => Promise<void>,
  cleanup: () => Promise<void> | void = () => {},
): Promise<void> {
  const external = process.env.DATABASE_URL
  const cluster = external ? undefined : await startCluster()
  try {
    const sql = postgres(external ?? await ensureDatabase(cluster!, 'arcwise'), { max: 1, onnotice: () => {} })
    try { await work({ sql, external: Boolean(external) }) }
    finally { await sql.end() }
  }
  catch (error) {
    console.error(error instanceof Error ? error.message : error)
    process.exitCode = 1
  }
  finally {
    await cleanup()
    cluster?.stop()
  }
}
