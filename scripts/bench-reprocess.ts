// The reprocessing benchmark (part of `npm run bench`; alone: `npx tsx scripts/bench-reprocess.ts`):
// 10,000 stored 1,000-point acquisitions reprocessed by one job after a back-dated calibration,
// so every one gets a new result version with its peaks. One acquisition is posted through the
// API; the other 10,000 are copies of its stored rows made by one SQL statement (posting them
// would take longer than the job). Reported: results per second over the job, and the server's
// RSS growth by the time 1,000 were processed and at the end (goal: growth at 10,000 at most
// 100 MB above growth at 1,000, i.e. memory does not grow with the job's length).
// Own database `arcwise_bench`, port 3300. Prints one JSON object.
import { readFileSync } from 'node:fs'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import postgres from 'postgres'
import { buildIfStale } from './lib/build'
import { demoAdmin } from './lib/console-client'
import { demoInstruments, thousandPointAcquisition } from './lib/demo-instruments'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const base = `http://127.0.0.1:${PORT}`
// The copies are acquired one a second from here: a window no demo acquisition falls in.
const WINDOW_START = Date.parse('2026-03-01T00:00:00Z')

function rssMb(pid: number): number {
  const status = readFileSync(`/proc/${pid}/status`, 'utf8')
  return Number(/VmRSS:\s+(\d+)/.exec(status)![1]) / 1024
}

export async function benchReprocess(opts: { acquisitions?: number } = {}) {
  const count = opts.acquisitions ?? Number(process.env.BENCH_REPROCESS_ACQUISITIONS ?? 10_000)
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile })
  const sql = postgres(stack.databaseUrl, { max: 1, onnotice: () => {} })
  buildIfStale()
  const server = startServer({ ...stack.serverEnv, NUXT_RATE_LIMIT_PER_MINUTE: '100000000', NUXT_REPROCESS_POLL_MS: '200' }, PORT)
  try {
    await waitForServer(`${base}/api/health`)
    const key = (JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>)['saltmarsh-isotopes']!
    const inst = demoInstruments.find(i => i.slug === 'irms-north')!
    const body = { ...thousandPointAcquisition(inst, `bench-rp-template-${process.pid}`), acquiredAt: new Date(WINDOW_START - 86_400_000).toISOString() }
    const posted = await fetch(`${base}/api/v1/acquisitions`, { method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${key}` }, body: JSON.stringify(body) })
    const template = await posted.json() as { id: string, detail?: string }
    if (posted.status !== 201) throw new Error(`posting the template answered ${posted.status}: ${template.detail ?? ''}`)

    const seedStarted = performance.now()
    await sql`
      with gen as (select gen_random_uuid() as acq_id, gen_random_uuid() as res_id, g from generate_series(1, ${count}::int) g),
      t as (select a.*, r.id as res_id, r.geometry_version_id, r.calibration_id, r.engine_version, r.summary from acquisitions a join results r on r.acquisition_id = a.id where a.id = ${template.id}::uuid),
      acq as (
        insert into acquisitions (id, lab_id, instrument_id, external_id, acquired_at, sample_ref, status, body_hash, payload, point_count,
          raw_sha256, raw_bytes, raw_content_type, arrays_sha256, arrays_bytes, created_at)
        select gen.acq_id, t.lab_id, t.instrument_id, 'bench-rp-' || gen.g, ${new Date(WINDOW_START).toISOString()}::timestamptz + make_interval(secs => gen.g), t.sample_ref, t.status, t.body_hash, t.payload, t.point_count,
          t.raw_sha256, t.raw_bytes, t.raw_content_type, t.arrays_sha256, t.arrays_bytes, now()
        from gen, t returning 1),
      -- Run ids in acquisition_runs, and now() (one instant in a statement) as the partition key
      -- of every copy, its result and its peaks (drizzle/0021_acquisition-partitions.sql).
      runs as (
        insert into acquisition_runs (lab_id, external_id, acquisition_id, acquisition_created_at)
        select t.lab_id, 'bench-rp-' || gen.g, gen.acq_id, now() from gen, t returning 1),
      res as (
        insert into results (id, acquisition_id, acquisition_created_at, lab_id, geometry_version_id, calibration_id, engine_version, summary, review_state, released_at)
        select gen.res_id, gen.acq_id, now(), t.lab_id, t.geometry_version_id, t.calibration_id, t.engine_version, t.summary, 'released', now()
        from gen, t returning 1),
      pk as (
        insert into peaks (result_id, acquisition_created_at, lab_id, mz, area, species, charge)
        select gen.res_id, now(), p.lab_id, p.mz, p.area, p.species, p.charge from gen, t join peaks p on p.result_id = t.res_id returning 1)
      select (select count(*) from acq) as a, (select count(*) from runs) as n, (select count(*) from res) as r, (select count(*) from pk) as p`
    await sql`analyze acquisitions`
    await sql`analyze results`
    const seedSeconds = (performance.now() - seedStarted) / 1000
    log(`${count.toLocaleString('en')} acquisitions stored in ${seedSeconds.toFixed(1)} s`)

    const admin = await demoAdmin(base)
    const labId = (await sql<[{ id: string }]>`select id from labs where slug = 'saltmarsh-isotopes'`)[0].id
    const instrumentId = (await sql<[{ id: string }]>`select id from instruments where slug = 'irms-north'`)[0].id
    // A calibration entered late: valid from before the window, reading every m/z 20 ppm high.
    const calibration = await admin.call('POST', `/api/console/labs/${labId}/instruments/${instrumentId}/calibrations`, {
      degree: 1, validFrom: new Date(WINDOW_START - 30 * 86_400_000).toISOString(), points: [28, 40, 44, 46].map(m => ({ measuredMz: m, referenceMz: m * (1 + 20e-6) })),
    })
    if (calibration.status !== 201) throw new Error(`the calibration answered ${calibration.status}: ${JSON.stringify(calibration.body)}`)

    const pid = server.pid!
    const rssBefore = rssMb(pid)
    let peak = rssBefore
    let peakAt1k: number | undefined
    let secondsAt1k: number | undefined
    const created = await admin.call<{ id: string, progress: { total: number } }>('POST', `/api/console/labs/${labId}/reprocess-jobs`, {
      instrumentId, from: new Date(WINDOW_START).toISOString(), to: new Date(WINDOW_START + (count + 1) * 1000).toISOString(), reason: 'benchmark: calibration entered late',
    })
    if (created.status !== 201 || created.body.progress.total !== count) throw new Error(`the job answered ${created.status}: ${JSON.stringify(created.body)}`)
    const started = performance.now()
    let job: { state: string, processed: number, changed: number, failed: number, started_at: Date | null, finished_at: Date | null }
    for (;;) {
      peak = Math.max(peak, rssMb(pid))
      ;[job] = await sql<[typeof job]>`select state, processed, changed, failed, started_at, finished_at from reprocess_jobs where id = ${created.body.id}`
      if (peakAt1k === undefined && job.processed >= Math.min(1000, count)) {
        peakAt1k = peak
        secondsAt1k = (performance.now() - started) / 1000
      }
      if (job.state !== 'queued' && job.state !== 'running') break
      if (performance.now() - started > 15 * 60_000) throw new Error(`the job did not finish in 15 minutes (${job.processed} of ${count})`)
      await new Promise(r => setTimeout(r, 50))
    }
    peak = Math.max(peak, rssMb(pid))
    if (job.state !== 'done' || job.processed !== count) throw new Error(`the job ended ${job.state} with ${job.processed} of ${count}`)
    const seconds = (job.finished_at!.getTime() - job.started_at!.getTime()) / 1000
    const growthAt1k = Math.round((peakAt1k ?? peak) - rssBefore)
    const growthAtEnd = Math.round(peak - rssBefore)
    return {
      acquisitions: count, pointsPerAcquisition: 1000, seedSeconds: Number(seedSeconds.toFixed(1)),
      seconds: Number(seconds.toFixed(1)), resultsPerSecond: Math.round(count / seconds),
      firstThousandSeconds: Number((secondsAt1k ?? 0).toFixed(1)), changed: job.changed, failed: job.failed,
      memory: { rssBeforeMb: Math.round(rssBefore), growthAt1000Mb: growthAt1k, growthAtEndMb: growthAtEnd, differenceMb: growthAtEnd - growthAt1k, goalMb: '≤ 100', met: growthAtEnd - growthAt1k <= 100 },
    }
  }
  finally {
    await sql.end()
    server.kill('SIGTERM')
    await stack.stop()
  }
}

if (import.meta.url === `file://${process.argv[1]}`) {
  log('reprocessing benchmark: about two minutes')
  const result = await benchReprocess()
  console.log(JSON.stringify({ benchmark: 'reprocess', node: process.version, cores: cpus().length, ...result }, null, 2))
}
