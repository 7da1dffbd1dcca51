// `npm run worker`: one more process of the same build in the worker role: it takes due
// webhook deliveries, deferred uploads and mail from the database that `npm start` uses,
// beside whatever other processes run, and serves nothing but its health check (port 3001,
// or WORKER_PORT). Workers share the work through row locks alone; Ctrl-C hands back its leases.
import { buildIfStale } from './lib/build'
import { ensureDatabase, startCluster } from './lib/pg'
import { localSecrets, log } from './lib/paths'
import { startServer } from './lib/services'

const port = Number(process.env.WORKER_PORT ?? 3001)
const cluster = await startCluster()
const databaseUrl = await ensureDatabase(cluster, 'arcwise')
buildIfStale()
const worker = startServer({
  NUXT_DATABASE_URL: databaseUrl,
  NUXT_SESSION_PASSWORD: localSecrets().sessionPassword,
  NUXT_SEALING_KEYS: localSecrets().sealingKeys,
  NUXT_APP_URL: process.env.NUXT_APP_URL ?? 'http://localhost:3000',
  NUXT_SMTP_HOST: '127.0.0.1',
  NUXT_SMTP_PORT: '2525',
  NUXT_PROCESS_ROLE: 'worker',
  NUXT_WEBHOOKS_ALLOW_HOSTS: '127.0.0.1:2590',
}, port)
log(`worker process on 127.0.0.1:${port} (health only); Ctrl-C stops it`)
const stop = () => { worker.kill('SIGTERM') }
process.on('SIGINT', stop)
process.on('SIGTERM', stop)
worker.on('exit', (code) => { cluster.stop(); process.exit(code ?? 0) })
