// `npm run bench:partitions`: what partitioning acquisitions and results by month
// (drizzle/0021_acquisition-partitions.sql) costs and takes, on a database of its own
// (`arcwise_bench_parts`, fresh each run). Migrated up to 0020, it is filled with
// BENCH_ACQUISITIONS (default 120,000) acquisitions spread over twelve months, one result
// and five peaks each; the two reads below are timed; migration 0021 is applied and timed;
// the reads are timed again as the code now writes them (bound by the partition key). Each
// read: the median of EXPLAIN ANALYZE's planning and execution times over 200 runs, for
// random acquisitions of one lab. Prints one JSON object.
import { cpSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { drizzle } from 'drizzle-orm/postgres-js'
import { migrate } from 'drizzle-orm/postgres-js/migrator'
import postgres from 'postgres'
import { log, root } from './lib/paths'
import { ensureDatabase, startCluster } from './lib/pg'

const count = Number(process.env.BENCH_ACQUISITIONS ?? 120_000)
const RUNS = 200
const PEAKS = 5

/** The migrations folder up to (not including) `tag`. */
function migrationsBefore(tag: string) {
  const dir = mkdtempSync(join(tmpdir(), 'arcwise-drizzle-'))
  cpSync(join(root, 'drizzle'), dir, { recursive: true })
  const journalFile = join(dir, 'meta', '_journal.json')
  const journal = JSON.parse(readFileSync(journalFile, 'utf8'))
  journal.entries = journal.entries.slice(0, journal.entries.findIndex((e: { tag: string }) => e.tag === tag))
  writeFileSync(journalFile, JSON.stringify(journal))
  return dir
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)]!

/** Median planning and execution time (ms) of `query(id)` for random acquisition ids. */
async function timed(sql: postgres.Sql, ids: string[], query: (id: string) => string) {
  const planning: number[] = []
  const execution: number[] = []
  for (let i = 0; i < RUNS; i++) {
    const id = ids[Math.floor(Math.random() * ids.length)]!
    const [row] = await sql.unsafe(`explain (analyze, format json) ${query(id)}`)
    const plan = (row!['QUERY PLAN'] as { 'Planning Time': number, 'Execution Time': number }[])[0]!
    planning.push(plan['Planning Time'])
    execution.push(plan['Execution Time'])
  }
  return { planningMs: Number(median(planning).toFixed(3)), executionMs: Number(median(execution).toFixed(3)) }
}

/** The lab's newest 50 acquisitions with their latest result's review state (the list's shape), and one acquisition's latest result. */
function reads(sql: postgres.Sql, labId: string, ids: string[], bound: boolean) {
  const withKey = (r: string, a: string) => bound ? ` and ${r}.acquisition_created_at = ${a}` : ''
  return {
    list: () => timed(sql, ids, () => `
      select a.id, a.external_id, a.acquired_at, a.created_at,
        (select r.review_state from results r where r.acquisition_id = a.id${withKey('r', 'a.created_at')} order by r.version desc limit 1) as review_state
      from acquisitions a where a.lab_id = '${labId}' order by a.created_at desc, a.id desc limit 50`),
    latestById: () => timed(sql, ids, id => `
      select a.id, a.external_id, r.id as result_id, r.summary from acquisitions a
      join results r on r.acquisition_id = a.id${withKey('r', 'a.created_at')}
        and r.version = (select max(r2.version) from results r2 where r2.acquisition_id = r.acquisition_id${withKey('r2', 'r.acquisition_created_at')})
      where a.id = '${id}' and a.lab_id = '${labId}' limit 1`),
  }
}

const cluster = await startCluster()
const before = migrationsBefore('0021_acquisition-partitions')
try {
  const url = await ensureDatabase(cluster, 'arcwise_bench_parts', { fresh: true })
  const migrateWith = async (folder: string) => {
    const client = postgres(url, { max: 1, onnotice: () => {} })
    try { await migrate(drizzle(client), { migrationsFolder: folder }) }
    finally { await client.end() }
  }
  await migrateWith(before)
  const sql = postgres(url, { max: 1, onnotice: () => {} })
  try {
    const [lab] = await sql`insert into labs (slug, name, site, contact_email) values ('bench-lab', 'Bench Lab', 'Site', 'lab@example.org') returning id`
    const [inst] = await sql`insert into instruments (lab_id, slug, name) values (${lab!.id}, 'ms-1', 'Sector one') returning id`
    const [geo] = await sql`insert into geometry_versions (instrument_id, version, kind, params, valid_from) values (${inst!.id}, 1, 'potential-sector', ${sql.json({})}, '2025-01-01T00:00:00Z') returning id`
    const seeded = performance.now()
    // Twelve months back from now, evenly; a summary of a realistic size (~1 kB).
    const summary = JSON.stringify({ peaks: Array.from({ length: PEAKS }, (_, i) => ({ centroid: 44 + i, area: 1 / (i + 1), assignment: { species: 'CO2', z: 1 } })), qc: [], ratios: [{ id: 'VPDB:13C/12C', value: 0.0111, u: 0.00001 }], engineVersion: 'bench' })
    await sql`
      with gen as (select gen_random_uuid() as acq_id, gen_random_uuid() as res_id, g,
          now() - make_interval(secs => (g::float8 / ${count}) * 365 * 86400) as at
        from generate_series(1, ${count}::int) g),
      acq as (
        insert into acquisitions (id, lab_id, instrument_id, external_id, acquired_at, status, body_hash, payload, point_count, created_at)
        select acq_id, ${lab!.id}, ${inst!.id}, 'bench-' || g, at, 'processed', md5(g::text), null, 4000, at from gen returning 1),
      res as (
        insert into results (id, acquisition_id, lab_id, geometry_version_id, engine_version, summary, review_state, released_at, created_at)
        select res_id, acq_id, ${lab!.id}, ${geo!.id}, 'bench', ${summary}::jsonb, 'released', at, at from gen returning 1),
      pk as (
        insert into peaks (result_id, lab_id, mz, area, species, charge)
        select res_id, ${lab!.id}, 44 + p, 1.0 / (p + 1), 'CO2', 1 from gen, generate_series(0, ${PEAKS - 1}::int) p returning 1)
      select (select count(*) from acq), (select count(*) from res), (select count(*) from pk)`
    await sql`analyze`
    log(`${count.toLocaleString('en')} acquisitions, ${(count * PEAKS).toLocaleString('en')} peaks stored in ${((performance.now() - seeded) / 1000).toFixed(1)} s`)
    const ids = (await sql`select id from acquisitions order by random() limit 1000`).map(r => r.id as string)
    const unpartitioned = reads(sql, lab!.id, ids, false)
    const beforeReads = { list: await unpartitioned.list(), latestById: await unpartitioned.latestById() }
    const started = performance.now()
    await migrateWith(join(root, 'drizzle'))
    const migrationSeconds = Number(((performance.now() - started) / 1000).toFixed(1))
    const [{ parts }] = await sql<[{ parts: number }]>`select count(*)::int as parts from pg_inherits i join pg_class p on p.oid = i.inhparent where p.relname = 'acquisitions'`
    const partitioned = reads(sql, lab!.id, ids, true)
    const afterReads = { list: await partitioned.list(), latestById: await partitioned.latestById() }
    console.log(JSON.stringify({ acquisitions: count, peaks: count * PEAKS, acquisitionPartitions: parts, migrationSeconds, before: beforeReads, after: afterReads }, null, 2))
  }
  finally { await sql.end() }
}
finally {
  rmSync(before, { recursive: true, force: true })
  cluster.stop()
}
