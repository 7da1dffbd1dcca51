// The local stand-in for an S3-compatible object store: s3rver on loopback, keeping its
// objects in a folder under .data/, with the bucket Arcwise uses. It speaks the S3 protocol,
// so the server's @aws-sdk/client-s3 code is the code that runs against a real store.
import { type ChildProcess, spawn } from 'node:child_process'
import { mkdirSync } from 'node:fs'
import { join } from 'node:path'
import S3rver from 's3rver'
import { root } from './paths'

export interface StoreFake {
  port: number
  bucket: string
  /** The server's environment for this store (NUXT_STORE_*). */
  env: Record<string, string>
  /** The process it runs in when started apart (startStoreFakeProcess); else this one's. */
  pid: number
  close: () => Promise<void>
}

/** The in-process fake, which can stop answering and start again (the chaos run's store outage). */
export interface RestartableStoreFake extends StoreFake {
  /** Stops answering; `start` serves the same objects again. */
  stop: () => Promise<void>
  start: () => Promise<void>
}

// s3rver's fixed credentials (it checks the signature against these).
const FAKE_KEY = 'S3RVER'

export async function startStoreFake(opts: { port: number, directory: string, bucket?: string }): Promise<RestartableStoreFake> {
  const bucket = opts.bucket ?? 'arcwise-raw'
  mkdirSync(opts.directory, { recursive: true })
  let server: S3rver | null = null
  const start = async () => {
    if (server) return
    const s = new S3rver({ port: opts.port, address: '127.0.0.1', silent: true, directory: opts.directory, configureBuckets: [{ name: bucket }] })
    await s.run()
    server = s
  }
  const stop = async () => {
    const s = server
    if (!s) return
    server = null
    const closing = s.close()
    // Sockets the server's S3 client keeps alive would hold the port open: cut them.
    s.httpServer?.closeAllConnections()
    await closing
  }
  await start()
  return { port: opts.port, bucket, env: storeEnv(opts.port, bucket), pid: process.pid, stop, start, close: stop }
}

/**
 * The same fake in a process of its own, for benchmarks: its CPU can then be told apart from
 * the benchmark's load generator (autocannon), and it no longer shares that event loop.
 */
export async function startStoreFakeProcess(opts: { port: number, directory: string, bucket?: string }): Promise<RestartableStoreFake> {
  const bucket = opts.bucket ?? 'arcwise-raw'
  let child: ChildProcess | null = null
  const fake: RestartableStoreFake = {
    port: opts.port, bucket, env: storeEnv(opts.port, bucket), pid: 0,
    start: async () => {
      if (child) return
      const started = spawn(join(root, 'node_modules', '.bin', 'tsx'), [join(root, 'scripts', 'lib', 'store-fake.ts'), String(opts.port), opts.directory, bucket], { cwd: root, stdio: ['ignore', 'pipe', 'inherit'] })
      // Ready, it prints its pid: tsx runs the script in a child of its own, the one that works.
      fake.pid = await new Promise<number>((resolve, reject) => {
        started.once('exit', code => reject(new Error(`the object-store fake exited (${code}) before it was ready`)))
        started.stdout!.once('data', (d: Buffer) => resolve(Number(d.toString().trim())))
      })
      started.removeAllListeners('exit')
      child = started
    },
    stop: () => new Promise<void>((resolve) => {
      const running = child
      child = null
      if (!running || running.exitCode !== null) return resolve()
      running.once('exit', () => resolve())
      running.kill('SIGTERM')
    }),
    close: () => fake.stop(),
  }
  await fake.start()
  return fake
}

export function storeEnv(port: number, bucket = 'arcwise-raw'): Record<string, string> {
  return {
    NUXT_STORE_ENDPOINT: `http://127.0.0.1:${port}`,
    NUXT_STORE_REGION: 'us-east-1',
    NUXT_STORE_BUCKET: bucket,
    NUXT_STORE_ACCESS_KEY_ID: FAKE_KEY,
    NUXT_STORE_SECRET_ACCESS_KEY: FAKE_KEY,
    NUXT_STORE_FORCE_PATH_STYLE: 'true',
  }
}

// `tsx scripts/lib/store-fake.ts <port> <directory> <bucket>`: startStoreFakeProcess's child.
if (import.meta.url === `file://${process.argv[1]}`) {
  const [port, directory, bucket] = process.argv.slice(2)
  const fake = await startStoreFake({ port: Number(port), directory: directory!, bucket })
  process.stdout.write(`${process.pid}\n`)
  process.once('SIGTERM', () => { void fake.close().then(() => process.exit(0)) })
}
