import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { startMailFake, type MailFake } from './mail-fake'
import { applyMigrations } from './migrate'
import { ensureDatabase, startCluster, type Cluster } from './pg'
import { dataDir, localSecrets, log, root } from './paths'

export interface Stack {
  cluster: Cluster
  databaseUrl: string
  mail: MailFake
  /** Environment for the built server (it reads no .env file). */
  serverEnv: Record<string, string>
  stop: () => Promise<void>
}

/** PostgreSQL, a migrated database, and the SMTP fake: what the server needs around it. */
export async function startStack(opts: { database: string, fresh?: boolean, smtpPort: number, mailHttpPort: number, appUrl: string, mailFile?: string }): Promise<Stack> {
  const cluster = await startCluster()
  let mail: MailFake | undefined
  try {
    const databaseUrl = await ensureDatabase(cluster, opts.database, { fresh: opts.fresh })
    await applyMigrations(databaseUrl)
    log(`database ${opts.database} migrated`)
    mail = await startMailFake({ smtpPort: opts.smtpPort, httpPort: opts.mailHttpPort, file: opts.mailFile })
    log(`SMTP fake on 127.0.0.1:${mail.smtpPort}, captured mail at ${mail.httpUrl}`)
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
    }
    const m = mail
    return {
      cluster, databaseUrl, mail: m, serverEnv,
      stop: async () => { await m.close(); cluster.stop() },
    }
  }
  catch (error) {
    await mail?.close()
    cluster.stop()
    throw error
  }
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
