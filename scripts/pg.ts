import { cli } from './lib/pg'

await cli(process.argv.slice(2))
