// `npm run store:retention`: applies each lab's raw-data retention now (worker processes also
// do it every NUXT_STORE_RETENTION_MINUTES): acquisitions older than their lab's days have
// their raw data marked removed, and objects no kept row references are deleted from the
// store. `--grace-seconds N` (default 3600): objects claimed by a writer within the last N
// seconds are left for the next run. DATABASE_URL and NUXT_STORE_* as for store:migrate.
import { parseArgs } from 'node:util'
import postgres from 'postgres'
import { applyRetention } from '../server/services/store/maintenance'
import { ensureDatabase, startCluster } from './lib/pg'
import { log } from './lib/paths'
import { commandStore } from './lib/store'

const { values } = parseArgs({ options: { 'grace-seconds': { type: 'string', default: '3600' } } })
const graceSeconds = Number(values['grace-seconds'])
if (!Number.isFinite(graceSeconds) || graceSeconds < 0) throw new Error('--grace-seconds must be a number of seconds, 0 or more')
const external = process.env.DATABASE_URL
const cluster = external ? undefined : await startCluster()
const store = await commandStore()
try {
  const sql = postgres(external ?? await ensureDatabase(cluster!, 'arcwise'), { max: 1, onnotice: () => {} })
  try {
    const outcome = await applyRetention(sql, store.access, { graceSeconds })
    log(`raw data of ${outcome.acquisitionsExpired} acquisition(s) removed under their labs' retention; ${outcome.objectsDeleted} object(s) deleted from the store`)
  }
  finally { await sql.end() }
}
catch (error) {
  console.error(error instanceof Error ? error.message : error)
  process.exitCode = 1
}
finally {
  await store.close()
  cluster?.stop()
}
