import { applyMigrations } from './lib/migrate'
import { log } from './lib/paths'

const url = process.env.DATABASE_URL
if (!url) {
  console.error('DATABASE_URL is not set; `npm start` and `npm test` migrate their own databases.')
  process.exit(2)
}
await applyMigrations(url)
log('migrations applied')
