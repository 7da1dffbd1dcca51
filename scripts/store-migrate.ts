// `npm run store:migrate`: moves the JSON payloads of acquisitions stored before the object
// store into it (raw/ and arrays/ by SHA-256) and clears their payload column. Resumable and
// idempotent: stop it at any point and run it again; moved rows are skipped. With
// DATABASE_URL and NUXT_STORE_* it works on those; without, on npm start's database and store.
import { moveLegacyPayloads } from '../server/services/store/maintenance'
import { runDatabaseCommand } from './lib/database-command'
import { log } from './lib/paths'
import { commandStore } from './lib/store'

const store = await commandStore()
await runDatabaseCommand(async ({ sql }) => {
  const moved = await moveLegacyPayloads(sql, store.access, { onProgress: n => { if (n % 100 === 0) log(`${n} moved`) } })
  const [left] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where payload is not null`
  log(`moved ${moved} acquisition payload(s) into the object store; ${left.n} left in PostgreSQL`)
}, () => store.close())
