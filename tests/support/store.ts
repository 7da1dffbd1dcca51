import { spawnSync } from 'node:child_process'
import { join } from 'node:path'
import { DeleteObjectCommand, GetObjectCommand, HeadObjectCommand, ListObjectsV2Command, S3Client } from '@aws-sdk/client-s3'
import { rootDir, testEnv } from './env'

/** The object store the test server writes to (npm test's s3rver), read directly. */
export function testStore(env: Record<string, string> = testEnv().serverEnv) {
  const s3 = new S3Client({
    region: env.NUXT_STORE_REGION, endpoint: env.NUXT_STORE_ENDPOINT, forcePathStyle: true,
    credentials: { accessKeyId: env.NUXT_STORE_ACCESS_KEY_ID!, secretAccessKey: env.NUXT_STORE_SECRET_ACCESS_KEY! },
  })
  const Bucket = env.NUXT_STORE_BUCKET!
  return {
    async bytes(key: string): Promise<Buffer> {
      const got = await s3.send(new GetObjectCommand({ Bucket, Key: key }))
      return Buffer.from(await got.Body!.transformToByteArray())
    },
    async head(key: string): Promise<{ bytes: number, lastModified: Date } | null> {
      try {
        const h = await s3.send(new HeadObjectCommand({ Bucket, Key: key }))
        return { bytes: h.ContentLength ?? 0, lastModified: h.LastModified! }
      }
      catch (error) { if ((error as { name?: string }).name === 'NotFound') return null; throw error }
    },
    async keys(prefix: string): Promise<string[]> {
      const listed = await s3.send(new ListObjectsV2Command({ Bucket, Prefix: prefix }))
      return (listed.Contents ?? []).map(o => o.Key!)
    },
    async remove(key: string) { await s3.send(new DeleteObjectCommand({ Bucket, Key: key })) },
    close: () => s3.destroy(),
  }
}

/** Runs one of the store commands (npm run store:migrate / store:retention) against the test database and store. */
export function storeCommand(script: 'store-migrate' | 'store-retention', args: string[] = []) {
  const env = testEnv()
  const storeSettings = Object.fromEntries(Object.entries(env.serverEnv).filter(([k]) => k.startsWith('NUXT_STORE_')))
  const run = spawnSync(join(rootDir, 'node_modules', '.bin', 'tsx'), [join(rootDir, 'scripts', `${script}.ts`), ...args], {
    cwd: rootDir, encoding: 'utf8', env: { ...process.env, ...storeSettings, DATABASE_URL: env.databaseUrl }, timeout: 120_000,
  })
  if (run.status !== 0) throw new Error(`${script} exited ${run.status}: ${run.stderr}${run.stdout}`)
  return run.stdout
}
