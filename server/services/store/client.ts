import { S3Client } from '@aws-sdk/client-s3'
import { closeLeanPut } from './leanPut'

// One S3 client per process, for any S3-compatible service: AWS S3, MinIO, Ceph, Garage,
// or the local fake (s3rver) that npm start and npm test run. Settings: runtimeConfig.store
// (NUXT_STORE_ENDPOINT, _REGION, _BUCKET, _ACCESS_KEY_ID, _SECRET_ACCESS_KEY,
// _FORCE_PATH_STYLE). Without a bucket the store is off and raw data stays in PostgreSQL,
// as before issue 23 (the benchmark's "store off").

export interface StoreSettings { endpoint: string, region: string, bucket: string, accessKeyId: string, secretAccessKey: string, forcePathStyle: boolean | string }

let client: { s3: S3Client, bucket: string } | undefined

export function storeSettings(): StoreSettings {
  return useRuntimeConfig().store as StoreSettings
}

export function storeEnabled(): boolean {
  return Boolean(storeSettings().bucket)
}

export function storeClient(): { s3: S3Client, bucket: string } {
  if (client) return client
  const s = storeSettings()
  if (!s.bucket) throw new Error('the object store is off (NUXT_STORE_BUCKET is empty)')
  const s3 = new S3Client({
    region: s.region || 'us-east-1',
    ...(s.endpoint ? { endpoint: s.endpoint } : {}),
    forcePathStyle: s.forcePathStyle === true || s.forcePathStyle === 'true',
    ...(s.accessKeyId ? { credentials: { accessKeyId: s.accessKeyId, secretAccessKey: s.secretAccessKey } } : {}),
    // A store that is down must fail an upload within seconds (503), not hold it for minutes.
    maxAttempts: 2,
    requestHandler: { connectionTimeout: 2000, requestTimeout: 60_000 },
  })
  client = { s3, bucket: s.bucket }
  return client
}

/** Closes the client's sockets (the Nitro close hook). */
export function closeStore() {
  client?.s3.destroy()
  client = undefined
  closeLeanPut()
}
