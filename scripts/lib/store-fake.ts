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
  close: () => Promise<void>
}

// s3rver's fixed credentials (it checks the signature against these).
const FAKE_KEY = 'S3RVER'

export async function startStoreFake(opts: { port: number, directory: string, bucket?: string }): Promise<StoreFake> {
  const bucket = opts.bucket ?? 'arcwise-raw'
  mkdirSync(opts.directory, { recursive: true })
  const server = new S3rver({ port: opts.port, address: '127.0.0.1', silent: true, directory: opts.directory, configureBuckets: [{ name: bucket }] })
  await server.run()
  return {
    port: opts.port,
    bucket,
    env: storeEnv(opts.port, bucket),
    close: async () => {
      const closing = server.close()
      // Sockets the server's S3 client keeps alive would hold the port open: cut them.
      server.httpServer?.closeAllConnections()
      await closing
    },
  }
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
