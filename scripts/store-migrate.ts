// `npm run store:migrate`: moves the JSON payloads of acquisitions stored before the object
// store into it (raw/ and arrays/ by SHA-256) and clears their payload column. Resumable and
// idempotent: stop it at any point and run it again; moved rows are skipped. With
// DATABASE_URL and NUXT_STORE_* it works on those; without, on npm start's database and store.
import postgres from 'postgres'
import { moveLegacyPayloads } from '../server/services/store/maintenance'
import { ensureDatabase, startCluster } from './lib/pg'
import { log } from './lib/paths'
import { commandStore } from './lib/store'

const external = process.env.DATABASE_URL
const cluster = external ? undefined : await startCluster()
const store = await commandStore()
try {
  const sql = postgres(external ?? await ensureDatabase(cluster!, 'arcwise'), { max: 1, onnotice: () => {} })
  try {
    const moved = await moveLegacyPayloads(sql, store.access, { onProgress: n => { if (n % 100 === 0) log(`${n} moved`) } })
    const [left] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where payload is not null`
    log(`moved ${moved} acquisition payload(s) into the object store; ${left.n} left in PostgreSQL`)
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
