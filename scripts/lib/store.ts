// The object store for the commands (store:migrate, store:retention): the S3 settings of the
// environment (NUXT_STORE_*, as the server reads them), or the local fake of npm start.
import { DeleteObjectCommand, HeadObjectCommand, S3Client } from '@aws-sdk/client-s3'
import { Upload } from '@aws-sdk/lib-storage'
import { join } from 'node:path'
import type { ObjectStoreAccess } from '../../server/services/store/maintenance'
import { dataDir } from './paths'
import { startStoreFake, storeEnv } from './store-fake'

export interface CommandStore { access: ObjectStoreAccess, close: () => Promise<void> }

/** The store of NUXT_STORE_* when set; else npm start's fake (started here when it is not running). */
export async function commandStore(): Promise<CommandStore> {
  let env: Record<string, string | undefined> = process.env
  let fake: Awaited<ReturnType<typeof startStoreFake>> | undefined
  if (!process.env.NUXT_STORE_BUCKET) {
    try { fake = await startStoreFake({ port: 4570, directory: join(dataDir, 'store-arcwise') }) }
    catch (error) { if ((error as { code?: string }).code !== 'EADDRINUSE') throw error }
    env = storeEnv(4570)
  }
  const s3 = new S3Client({
    region: env.NUXT_STORE_REGION || 'us-east-1',
    ...(env.NUXT_STORE_ENDPOINT ? { endpoint: env.NUXT_STORE_ENDPOINT } : {}),
    forcePathStyle: env.NUXT_STORE_FORCE_PATH_STYLE === 'true',
    ...(env.NUXT_STORE_ACCESS_KEY_ID ? { credentials: { accessKeyId: env.NUXT_STORE_ACCESS_KEY_ID, secretAccessKey: env.NUXT_STORE_SECRET_ACCESS_KEY ?? '' } } : {}),
  })
  const Bucket = env.NUXT_STORE_BUCKET!
  const access: ObjectStoreAccess = {
    async put(kind, sha256, data, contentType) {
      const Key = `${kind}/${sha256}`
      try {
        const head = await s3.send(new HeadObjectCommand({ Bucket, Key }))
        if (head.ContentLength === data.length) return
      }
      catch (error) { if ((error as { name?: string }).name !== 'NotFound') throw error }
      await new Upload({ client: s3, params: { Bucket, Key, Body: data, ContentType: contentType, Metadata: { sha256 } } }).done()
    },
    async remove(kind, sha256) {
      await s3.send(new DeleteObjectCommand({ Bucket, Key: `${kind}/${sha256}` }))
    },
  }
  return { access, close: async () => { s3.destroy(); await fake?.close() } }
}
