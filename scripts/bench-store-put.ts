// `npx tsx scripts/bench-store-put.ts`: the CPU one PUT of a small object costs the client
// and the store fake, by the way it is sent: lib-storage's Upload (the ingest path before the
// lean PUT), the SDK's PutObjectCommand, and the lean signed PUT over undici
// (server/services/store/leanPut.ts). The fake (s3rver) runs in a process of its own, and
// each way sends the same number of distinct objects of BENCH_PUT_BYTES (20,000 by default:
// a 1,000-point JSON body is about that) at 16 at once. Prints one JSON object. No
// PostgreSQL, no app server: run it without the shared lock only on an idle machine.
import { createHash, randomBytes } from 'node:crypto'
import { mkdtempSync, rmSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { Readable } from 'node:stream'
import { PutObjectCommand, S3Client } from '@aws-sdk/client-s3'
import { Upload } from '@aws-sdk/lib-storage'
import { closeLeanPut, leanPut } from '../server/services/store/leanPut'
import { cpuByProcess, cpuSpent } from './lib/cpu'
import { startStoreFakeProcess } from './lib/store-fake'

const PORT = 4576
const sha256Of = (data: Buffer) => createHash('sha256').update(data).digest('hex')
const count = Number(process.env.BENCH_PUT_COUNT ?? 2000)
const bytes = Number(process.env.BENCH_PUT_BYTES ?? 20_000)
const concurrency = 16

const directory = mkdtempSync(join(tmpdir(), 'arcwise-put-bench-'))
const fake = await startStoreFakeProcess({ port: PORT, directory })
const env = fake.env
const s3 = new S3Client({
  region: env.NUXT_STORE_REGION, endpoint: env.NUXT_STORE_ENDPOINT, forcePathStyle: true,
  credentials: { accessKeyId: env.NUXT_STORE_ACCESS_KEY_ID!, secretAccessKey: env.NUXT_STORE_SECRET_ACCESS_KEY! },
  maxAttempts: 2, requestHandler: { connectionTimeout: 2000, requestTimeout: 60_000 },
})
const bucket = fake.bucket

type Way = (key: string, data: Buffer, sha256: string) => Promise<unknown>
const ways: Record<string, Way> = {
  'lib-storage Upload': (key, data, sha256) => new Upload({
    client: s3, queueSize: 2,
    params: { Bucket: bucket, Key: key, Body: Readable.from([data]), ContentType: 'application/json', Metadata: { sha256 } },
  }).done(),
  'SDK PutObject': (key, data, sha256) => s3.send(new PutObjectCommand({ Bucket: bucket, Key: key, Body: data, ContentType: 'application/json', Metadata: { sha256 } })),
  'lean signed PUT': (key, data, sha256) => leanPut(s3, bucket, key, data, sha256, 'application/json', { sha256 }),
}

async function measure(name: string, way: Way) {
  const objects = Array.from({ length: count }, () => randomBytes(bytes))
  // Warm-up: connections, the JIT, the credentials and endpoint caches.
  for (let i = 0; i < 50; i++) { const d = randomBytes(bytes); await way(`warm/${sha256Of(d)}`, d, sha256Of(d)) }
  const before = cpuByProcess(0, fake.pid)
  const own = process.cpuUsage()
  const started = performance.now()
  let next = 0
  await Promise.all(Array.from({ length: concurrency }, async () => {
    while (next < objects.length) {
      const data = objects[next++]!
      const sha256 = sha256Of(data)
      await way(`raw/${sha256}`, data, sha256)
    }
  }))
  const seconds = (performance.now() - started) / 1000
  const used = process.cpuUsage(own)
  const spent = cpuSpent(before, cpuByProcess(0, fake.pid))
  // The client's CPU includes hashing each object once (the caller's content address), as ingest does.
  return {
    way: name, puts: count, putsPerSecond: Math.round(count / seconds),
    clientCpuMicrosecondsPerPut: Math.round((used.user + used.system) / count),
    storeFakeCpuMicrosecondsPerPut: Math.round(spent.store / count * 1e6),
  }
}

try {
  const results = []
  for (const [name, way] of Object.entries(ways)) results.push(await measure(name, way))
  // Once more in reverse order: whatever drifts (the fake's folder growing) weighs on all.
  for (const [name, way] of Object.entries(ways).reverse()) results.push(await measure(name, way))
  console.log(JSON.stringify({ benchmark: 'store-put', node: process.version, bytes, concurrency, results }, null, 2))
}
finally {
  closeLeanPut()
  s3.destroy()
  await fake.close()
  rmSync(directory, { recursive: true, force: true })
}
