// The local stand-in for an S3-compatible object store: s3rver on loopback, keeping its
// objects in a folder under .data/, with the bucket Arcwise uses. It speaks the S3 protocol,
// so the server's @aws-sdk/client-s3 code is the code that runs against a real store.
import { mkdirSync } from 'node:fs'
import S3rver from 's3rver'

export interface StoreFake {
  port: number
  bucket: string
  /** The server's environment for this store (NUXT_STORE_*). */
  env: Record<string, string>
  /** Stops answering (the chaos run's store outage); `start` serves the same objects again. */
  stop: () => Promise<void>
  start: () => Promise<void>
  close: () => Promise<void>
}

// s3rver's fixed credentials (it checks the signature against these).
const FAKE_KEY = 'S3RVER'

export async function startStoreFake(opts: { port: number, directory: string, bucket?: string }): Promise<StoreFake> {
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
  return { port: opts.port, bucket, env: storeEnv(opts.port, bucket), stop, start, close: stop }
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
