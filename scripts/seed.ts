import { demoKeysFile, seedDemo } from './lib/seed'
import { log } from './lib/paths'

const url = process.env.DATABASE_URL
if (!url) { console.error('DATABASE_URL is not set; `npm start` seeds its own database.'); process.exit(2) }
if (!await seedDemo(url, { keysFile: demoKeysFile })) log('database already has labs; demo not seeded again')
