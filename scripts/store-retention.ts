// `npm run store:retention`: applies each lab's raw-data retention now (worker processes also
// do it every NUXT_STORE_RETENTION_MINUTES): acquisitions older than their lab's days have
// their raw data marked removed, and objects no kept row references are deleted from the
// store. `--grace-seconds N` (default 3600): objects claimed by a writer within the last N
// seconds are left for the next run. DATABASE_URL and NUXT_STORE_* as for store:migrate.
import { parseArgs } from 'node:util'
import { applyRetention } from '../server/services/store/maintenance'
import { runDatabaseCommand } from './lib/database-command'
import { log } from './lib/paths'
import { commandStore } from './lib/store'

const { values } = parseArgs({ options: { 'grace-seconds': { type: 'string', default: '3600' } } })
const graceSeconds = Number(values['grace-seconds'])
if (!Number.isFinite(graceSeconds) || graceSeconds < 0) throw new Error('--grace-seconds must be a number of seconds, 0 or more')
const store = await commandStore()
await runDatabaseCommand(async ({ sql }) => {
  const outcome = await applyRetention(sql, store.access, { graceSeconds })
  log(`raw data of ${outcome.acquisitionsExpired} acquisition(s) removed under their labs' retention; ${outcome.objectsDeleted} object(s) deleted from the store`)
}, () => store.close())
