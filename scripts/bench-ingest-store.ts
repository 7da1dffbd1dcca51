// `npx tsx scripts/bench-ingest-store.ts` (part of `npm run bench`): raw data in PostgreSQL
// (the object store off: NUXT_STORE_BUCKET empty) against raw data in the object store (the
// local s3rver), one server after the other on the same database: the server's memory growth
// while it takes a 10^6-point CSV upload, and the database bytes each stored acquisition
// costs (acquisitions and uploads tables with their TOAST and indexes, before and after),
// for 1,000-point JSON sweeps and for the 10^6-point upload. Prints one JSON object.
import { readFileSync } from 'node:fs'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import postgres from 'postgres'
import { uploadMemory } from './bench-ingest'
import { buildIfStale } from './lib/build'
import { demoInstruments, thousandPointAcquisition } from './lib/demo-instruments'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const base = `http://127.0.0.1:${PORT}`
const SMALL = 200

export async function benchObjectStore() {
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
  const sql = postgres(stack.databaseUrl, { max: 1, onnotice: () => {} })
  buildIfStale()
  const keys = JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>
  const key = keys['saltmarsh-isotopes']!
  const inst = demoInstruments.find(i => i.slug === 'irms-north')!
  // Acquisitions are partitioned by month (migration 0021): the parent holds no rows, so its
  // size is 0 and its partitions' are summed (all 0 B in the 2026-12-04 bench before this).
  // uploads is a plain table (pg_partition_tree lists nothing for one).
  const tableBytes = async () => Number((await sql<[{ b: string }]>`
    select ((select sum(pg_total_relation_size(relid)) from pg_partition_tree('acquisitions'))
      + pg_total_relation_size('uploads'))::text as b`)[0].b)
  const phase = async (name: 'storeOff' | 'storeOn') => {
    const env = name === 'storeOff' ? { ...stack.serverEnv, NUXT_STORE_BUCKET: '' } : stack.serverEnv
    const server = startServer({ ...env, NUXT_RATE_LIMIT_PER_MINUTE: '100000000' }, PORT)
    try {
      await waitForServer(`${base}/api/health`)
      await sql`checkpoint`
      const before = await tableBytes()
      for (let i = 0; i < SMALL; i++) {
        const res = await fetch(`${base}/api/v1/acquisitions`, {
          method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${key}` },
          body: JSON.stringify(thousandPointAcquisition(inst, `bench-store-${name}-${i}`)),
        })
        if (res.status !== 201) throw new Error(`${name}: posting answered ${res.status}: ${await res.text()}`)
      }
      const afterSmall = await tableBytes()
      const upload = await uploadMemory(server.pid!, key, `bench-1m-${name}-${process.pid}`)
      const afterUpload = await tableBytes()
      const [stored] = await sql<[{ payload: number | null, body: number | null }]>`
        select pg_column_size(a.payload)::int as payload, (select pg_column_size(u.body)::int from uploads u where u.acquisition_id = a.id) as body
        from acquisitions a where a.external_id = ${`bench-1m-${name}-${process.pid}`}`
      return {
        upload1M: upload,
        databaseBytesPerAcquisition1kPoints: Math.round((afterSmall - before) / SMALL),
        databaseBytesFor1MUpload: afterUpload - afterSmall,
        payloadColumnBytes1M: (stored?.payload ?? 0) + (stored?.body ?? 0),
      }
    }
    finally {
      server.kill('SIGTERM')
      await new Promise(r => server.once('exit', r))
    }
  }
  try {
    const storeOff = await phase('storeOff')
    const storeOn = await phase('storeOn')
    return { acquisitions1kPoints: SMALL, storeOff, storeOn }
  }
  finally {
    await sql.end()
    await stack.stop()
  }
}

if (import.meta.url === `file://${process.argv[1]}`) {
  log('object store against raw data in PostgreSQL: about a minute')
  const result = await benchObjectStore()
  console.log(JSON.stringify({ benchmark: 'object-store', node: process.version, cores: cpus().length, ...result }, null, 2))
  const row = (r: typeof result.storeOff) => ({
    'server memory growth, 10^6-point upload (MB)': r.upload1M.growthMb,
    '10^6-point upload status': `${r.upload1M.httpStatus} → ${r.upload1M.finalStatus}`,
    'database bytes per 1,000-point acquisition': r.databaseBytesPerAcquisition1kPoints,
    'database bytes for the 10^6-point upload': r.databaseBytesFor1MUpload,
  })
  console.table({ 'store off (PostgreSQL)': row(result.storeOff), 'object store': row(result.storeOn) })
}
