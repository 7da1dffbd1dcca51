import { spawn, type ChildProcess } from 'node:child_process'
import { rmSync } from 'node:fs'
import { join } from 'node:path'
import { startMailFake, type MailFake } from './mail-fake'
import { startStoreFake, startStoreFakeProcess, type RestartableStoreFake } from './store-fake'
import { applyMigrations } from './migrate'
import { ensureDatabase, startCluster, type Cluster } from './pg'
import { dataDir, localSecrets, log, root } from './paths'

export interface Stack {
  cluster: Cluster
  databaseUrl: string
  mail: MailFake
  /** The local S3 fake (s3rver) holding raw data. */
  store: RestartableStoreFake
  /** Environment for the built server (it reads no .env file). */
  serverEnv: Record<string, string>
  stop: () => Promise<void>
}

/**
 * PostgreSQL, a migrated database, the SMTP fake and the object-store fake (s3rver on
 * `storePort`, its objects under .data/store-<database>/; fresh when the database is): what
 * the server needs around it. `storeProcess`: the store fake in a process of its own (benchmarks
 * that report its CPU apart).
 */
export async function startStack(opts: { database: string, fresh?: boolean, smtpPort: number, mailHttpPort: number, storePort: number, appUrl: string, mailFile?: string, storeProcess?: boolean }): Promise<Stack> {
  const cluster = await startCluster()
  let mail: MailFake | undefined
  let store: RestartableStoreFake | undefined
  try {
    const databaseUrl = await ensureDatabase(cluster, opts.database, { fresh: opts.fresh })
    await applyMigrations(databaseUrl)
    log(`database ${opts.database} migrated`)
    mail = await startMailFake({ smtpPort: opts.smtpPort, httpPort: opts.mailHttpPort, file: opts.mailFile })
    log(`SMTP fake on 127.0.0.1:${mail.smtpPort}, captured mail at ${mail.httpUrl}`)
    const storeDir = join(dataDir, `store-${opts.database}`)
    if (opts.fresh) rmSync(storeDir, { recursive: true, force: true })
    store = await (opts.storeProcess ? startStoreFakeProcess : startStoreFake)({ port: opts.storePort, directory: storeDir })
    log(`object-store fake (s3rver) on 127.0.0.1:${store.port}, bucket ${store.bucket}, objects in ${storeDir}`)
    const serverEnv = {
      NUXT_DATABASE_URL: databaseUrl,
      NUXT_SESSION_PASSWORD: localSecrets().sessionPassword,
      NUXT_SEALING_KEYS: localSecrets().sealingKeys,
      // Prometheus's bearer token for /metrics (kept in .data/secrets.json).
      NUXT_METRICS_TOKEN: localSecrets().metricsToken,
      // One JSON line per API request at info: tests and benchmarks keep their output to
      // warnings (set NUXT_LOG_LEVEL to see more); npm start logs every request.
      NUXT_LOG_LEVEL: process.env.NUXT_LOG_LEVEL ?? 'warn',
      NUXT_APP_URL: opts.appUrl,
      NUXT_SMTP_HOST: '127.0.0.1',
      NUXT_SMTP_PORT: String(mail.smtpPort),
      NUXT_MAIL_CAPTURE_URL: mail.httpUrl,
      NUXT_PUBLIC_MAIL_CAPTURE: 'true',
      ...store.env,
    }
    const m = mail
    const st = store
    return {
      cluster, databaseUrl, mail: m, store: st, serverEnv,
      stop: async () => { await m.close(); await st.close(); cluster.stop() },
    }
  }
  catch (error) {
    await mail?.close()
    await store?.close()
    cluster.stop()
    throw error
  }
}

/** BENCH_STORE=off for a benchmark's server: raw data in PostgreSQL as before the object store (issue 23), to compare. */
export function benchStoreEnv(): Record<string, string> {
  return process.env.BENCH_STORE === 'off' ? { NUXT_STORE_BUCKET: '' } : {}
}

/** The built server; `ARCWISE_SERVER_NODE_ARGS` (e.g. "--cpu-prof") passes flags to its Node.js. */
export function startServer(env: Record<string, string>, port: number): ChildProcess {
  const nodeArgs = process.env.ARCWISE_SERVER_NODE_ARGS?.split(' ').filter(Boolean) ?? []
  return spawn(process.execPath, [...nodeArgs, join(root, '.output', 'server', 'index.mjs')], {
    cwd: root,
    stdio: 'inherit',
    env: { ...process.env, ...env, PORT: String(port), HOST: '127.0.0.1', NODE_ENV: 'production' },
  })
}

export const mailFile = join(dataDir, 'mail.jsonl')

/** Resolves once `url` answers 2xx (the server is up); fails after a minute. */
export async function waitForServer(url: string) {
  for (let i = 0; i < 120; i++) {
    try { if ((await fetch(url)).ok) return }
    catch { /* not up yet */ }
    await new Promise(r => setTimeout(r, 500))
  }
  throw new Error(`the server did not answer at ${url}`)
}
