// Issue 23, point 4: deliveries and delivery attempts partitioned by month. The migration run
// on a database holding rows (from the migration before it, on a scratch database), rows of
// the running server landing in their month, a row dated into a month without a partition
// landing in the default partition and reported, retention by whole months, and db:sizes.
import { spawnSync } from 'node:child_process'
import { cpSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { drizzle } from 'drizzle-orm/postgres-js'
import { migrate } from 'drizzle-orm/postgres-js/migrator'
import postgres from 'postgres'
import { afterAll, describe, expect, it } from 'vitest'
import { monthOf } from '../../server/services/partitions/maintenance'
import { rootDir, testEnv } from '../support/env'
import { bearer, co2Acquisition, labWithInstrument } from '../support/lab'
import { redateAcquisitions } from '../support/partitions'
import { ConsoleClient, testDb, unique, useArcwise } from '../support/server'
import { grantedPartnerWithEndpoint, insertPausedEndpoint, recordingSink, until } from '../support/webhooks'

const SINK_PORT = 4234
await useArcwise({ env: { NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}`, NUXT_WEBHOOKS_POLL_MS: '200' } })
const received = await recordingSink(SINK_PORT)

/** Runs `npm run db:partitions` or `npm run db:sizes` against the test database. */
function command(script: 'db-partitions' | 'db-sizes', args: string[] = [], env: Record<string, string> = {}) {
  const run = spawnSync(join(rootDir, 'node_modules', '.bin', 'tsx'), [join(rootDir, 'scripts', `${script}.ts`), ...args], {
    cwd: rootDir, encoding: 'utf8', env: { ...process.env, ...env, DATABASE_URL: testEnv().databaseUrl }, timeout: 120_000,
  })
  if (run.status !== 0) throw new Error(`${script} exited ${run.status}: ${run.stderr}${run.stdout}`)
  return run.stdout
}

const partitionOf = async (sql: postgres.Sql, table: string, where: postgres.PendingQuery<postgres.Row[]>) =>
  (await sql`select tableoid::regclass::text as part from ${sql(table)} where ${where}`).map(r => r.part as string)

const headers = { 'webhook-id': 'x' }

/** A paused endpoint (the worker leaves it alone) with deliveries and attempts dated where the test says. */
async function oldDeliveries(rows: { createdAt: string, status: 'pending' | 'succeeded' | 'dead', attempts: number }[]) {
  const sql = testDb()
  const [partner] = await sql`insert into partners (slug, name, kind, contact_email) values (${unique('part')}, 'Partition Partner', 'data_team', 'p@example.org') returning id`
  const endpoint = await insertPausedEndpoint(partner!.id, `http://127.0.0.1:${SINK_PORT}/old`)
  const ids: string[] = []
  for (const r of rows) {
    const [d] = await sql`insert into deliveries (endpoint_id, event_type, test_payload, status, attempts, created_at, finished_at)
      values (${endpoint}, 'webhook.test', ${sql.json({ test: true })}, ${r.status}, ${r.attempts}, ${r.createdAt}, ${r.status === 'pending' ? null : r.createdAt}) returning id, created_at`
    for (let n = 1; n <= r.attempts; n++) {
      await sql`insert into delivery_attempts (delivery_id, delivery_created_at, number, at, duration_ms, class, status_code, request_headers)
        values (${d!.id}, ${d!.created_at}, ${n}, ${r.createdAt}, 12, ${r.status === 'succeeded' ? 'success' : 'http-error'}, ${r.status === 'succeeded' ? 200 : 500}, ${sql.json(headers)})`
    }
    ids.push(d!.id)
  }
  return { partner: partner!.id as string, endpoint, ids }
}

/**
 * A scratch database migrated up to the migration before `tag` (the database as it was before
 * it), with `fill` writing rows into it and `check` run after the remaining migrations. The
 * session's time zone is far from UTC: months are UTC months whatever the session says.
 */
async function acrossMigration(name: string, tag: string, fill: (sql: postgres.Sql) => Promise<void>, check: (sql: postgres.Sql) => Promise<void>) {
  const adminUrl = new URL(testEnv().databaseUrl)
  adminUrl.pathname = '/postgres'
  const admin = postgres(adminUrl.toString(), { max: 1, onnotice: () => {} })
  await admin.unsafe(`drop database if exists ${name} with (force)`)
  await admin.unsafe(`create database ${name}`)
  const url = new URL(testEnv().databaseUrl)
  url.pathname = `/${name}`
  const before = mkdtempSync(join(tmpdir(), 'arcwise-drizzle-'))
  cpSync(join(rootDir, 'drizzle'), before, { recursive: true })
  const journal = JSON.parse(readFileSync(join(before, 'meta', '_journal.json'), 'utf8'))
  const last = journal.entries.findIndex((e: { tag: string }) => e.tag === tag)
  expect(last).toBeGreaterThan(0)
  journal.entries = journal.entries.slice(0, last)
  writeFileSync(join(before, 'meta', '_journal.json'), JSON.stringify(journal))
  const session = { max: 1, onnotice: () => {}, connection: { TimeZone: 'Pacific/Auckland' } }
  // The migrator on a client of its own, as npm run db:migrate does (Drizzle changes the
  // client's JSON and date handling).
  const migrateWith = async (migrationsFolder: string) => {
    const client = postgres(url.toString(), session)
    try { await migrate(drizzle(client), { migrationsFolder }) }
    finally { await client.end() }
  }
  const sql = postgres(url.toString(), session)
  try {
    await migrateWith(before)
    await fill(sql)
    await migrateWith(join(rootDir, 'drizzle'))
    await check(sql)
  }
  finally {
    await sql.end()
    rmSync(before, { recursive: true, force: true })
    await admin.unsafe(`drop database if exists ${name} with (force)`)
    await admin.end()
  }
}

// Plain rows: a result also carries its columns' table oids, which a migration changes.
const plain = (rows: postgres.RowList<postgres.Row[]>) => rows.map(r => ({ ...r }))

describe('the migration to monthly partitions', () => {
  it('converts a database holding deliveries and attempts from the migration before it without losing or renumbering a row', async () => {
    let oldDeliveries: postgres.Row[] = []
    let oldAttempts: postgres.Row[] = []
    await acrossMigration('arcwise_parts_migration', '0019_monthly-partitions', async (sql) => {
      const [lab] = await sql`insert into labs (slug, name, site, contact_email) values ('old-lab', 'Old Lab', 'Site', 'lab@example.org') returning id`
      const [partner] = await sql`insert into partners (slug, name, kind, contact_email) values ('old-partner', 'Old Partner', 'data_team', 'p@example.org') returning id`
      const [endpoint] = await sql`insert into webhook_endpoints (partner_id, url, event_types, sealed_secret) values (${partner!.id}, 'https://example.org/hook', ${['result.released']}, 'sealed') returning id`
      const dated = ['2026-09-15T10:00:00Z', '2026-10-31T23:59:59.999Z', '2026-11-01T00:00:00Z', new Date().toISOString()]
      for (const [i, at] of dated.entries()) {
        const [event] = await sql`insert into events (lab_id, sequence, type, payload, created_at) values (${lab!.id}, ${i + 1}, 'result.released', ${sql.json({ id: `acq-${i}` })}, ${at}) returning id`
        const [d] = await sql`insert into deliveries (endpoint_id, event_id, event_type, status, attempts, created_at) values (${endpoint!.id}, ${event!.id}, 'result.released', ${i === 3 ? 'pending' : 'succeeded'}, ${i === 3 ? 0 : 2}, ${at}) returning id`
        for (const n of i === 3 ? [] : [1, 2]) await sql`insert into delivery_attempts (delivery_id, number, duration_ms, class, request_headers) values (${d!.id}, ${n}, 5, 'success', ${sql.json(headers)})`
      }
      oldDeliveries = plain(await sql`select id, created_at, status, attempts from deliveries order by id`)
      oldAttempts = plain(await sql`select id, delivery_id, number from delivery_attempts order by id`)
      expect(oldDeliveries.length).toBe(4)
      expect(oldAttempts.length).toBe(6)
    }, async (sql) => {
      // Every row is there with its id; nothing else changed.
      expect(plain(await sql`select id, created_at, status, attempts from deliveries order by id`)).toEqual(oldDeliveries)
      expect(plain(await sql`select id, delivery_id, number from delivery_attempts order by id`)).toEqual(oldAttempts)
      const [kind] = await sql`select relkind from pg_class where relname = 'deliveries'`
      expect(kind!.relkind).toBe('p')
      // Each row sits in its UTC month: the last millisecond of October in October.
      const placed = await sql`select tableoid::regclass::text as part, to_char(created_at at time zone 'UTC', 'YYYY_MM') as month from deliveries`
      for (const p of placed) expect(p.part).toBe(`deliveries_${p.month}`)
      expect(placed.map(p => p.part).sort()).toEqual(['deliveries_2026_09', 'deliveries_2026_10', 'deliveries_2026_11', `deliveries_${monthOf(new Date()).replace('-', '_')}`].sort())
      const attempts = await sql`select a.tableoid::regclass::text as part, a.delivery_created_at = d.created_at as same, to_char(d.created_at at time zone 'UTC', 'YYYY_MM') as month
        from delivery_attempts a join deliveries d on d.id = a.delivery_id`
      expect(attempts.length).toBe(6)
      for (const a of attempts) expect(a).toMatchObject({ same: true, part: `delivery_attempts_${a.month}` })
      // The months up to two after this one, and a default partition, for both tables.
      const parts = (await sql`select c.relname from pg_inherits i join pg_class c on c.oid = i.inhrelid join pg_class p on p.oid = i.inhparent where p.relname in ('deliveries', 'delivery_attempts')`).map(r => r.relname)
      for (const offset of [0, 1, 2]) {
        const m = monthOf(new Date(), offset).replace('-', '_')
        expect(parts).toContain(`deliveries_${m}`)
        expect(parts).toContain(`delivery_attempts_${m}`)
      }
      expect(parts).toEqual(expect.arrayContaining(['deliveries_default', 'delivery_attempts_default']))
      // The attempts' numbering carries on after the copied rows.
      const pending = oldDeliveries.find(d => d.status === 'pending')!
      const [next] = await sql`insert into delivery_attempts (delivery_id, delivery_created_at, number, duration_ms, class, request_headers)
        values (${pending.id}, ${pending.created_at}, 1, 5, 'success', ${sql.json(headers)}) returning id`
      expect(Number(next!.id)).toBeGreaterThan(Math.max(...oldAttempts.map(a => Number(a.id))))
      // The foreign key still holds: no attempt for a delivery that is not there, and deleting
      // a delivery takes its attempts with it.
      await expect(sql`insert into delivery_attempts (delivery_id, delivery_created_at, number, duration_ms, class, request_headers)
        values (${pending.id}, '2020-01-01T00:00:00Z', 1, 5, 'success', ${sql.json(headers)})`).rejects.toMatchObject({ code: '23503' })
      const first = oldDeliveries.find(d => d.status === 'succeeded')!
      await sql`delete from deliveries where id = ${first.id}`
      const [{ n }] = await sql`select count(*)::int as n from delivery_attempts where delivery_id = ${first.id}` as unknown as [{ n: number }]
      expect(n).toBe(0)
      // One delivery per event and endpoint still.
      await expect(sql`insert into deliveries (id, endpoint_id, event_id, event_type, created_at)
        select gen_random_uuid(), endpoint_id, event_id, event_type, created_at from deliveries where id = ${pending.id}`).rejects.toMatchObject({ code: '23505' })
    })
  }, 120_000)

  it('converts acquisitions and results, with their peaks, sequence items, reprocess items and uploads, from the migration before it: ids unchanged, each in its month', async () => {
    // The last millisecond of October stays in October (UTC), whatever the session's zone.
    const dated = ['2026-09-15T10:00:00Z', '2026-10-31T23:59:59.999Z', '2026-11-01T00:00:00Z']
    const snapshot = async (sql: postgres.Sql) => ({
      acquisitions: plain(await sql`select id, external_id, created_at from acquisitions order by id`),
      results: plain(await sql`select id, acquisition_id, version, supersedes, superseded_by from results order by id`),
      peaks: plain(await sql`select id, result_id, mz from peaks order by id`),
      sequenceItems: plain(await sql`select sequence_id, position, acquisition_id from sequence_items order by position`),
      reprocessItems: plain(await sql`select job_id, acquisition_id, old_result_id, new_result_id from reprocess_items`),
      uploads: plain(await sql`select id, acquisition_id from uploads`),
    })
    let before: Awaited<ReturnType<typeof snapshot>>
    await acrossMigration('arcwise_parts_acq_migration', '0021_acquisition-partitions', async (sql) => {
      const [lab] = await sql`insert into labs (slug, name, site, contact_email) values ('old-lab', 'Old Lab', 'Site', 'lab@example.org') returning id`
      const [inst] = await sql`insert into instruments (lab_id, slug, name) values (${lab!.id}, 'ms-1', 'Sector one') returning id`
      const [geo] = await sql`insert into geometry_versions (instrument_id, version, kind, params, valid_from) values (${inst!.id}, 1, 'potential-sector', ${sql.json({})}, '2026-01-01T00:00:00Z') returning id`
      const [key] = await sql`insert into api_keys (lab_id, name, prefix, secret_hash, scopes) values (${lab!.id}, 'lab PC', 'aw_old', 'hash', ${['acquisitions:write']}) returning id`
      const [seq] = await sql`insert into sequences (lab_id, instrument_id, external_id, body_hash) values (${lab!.id}, ${inst!.id}, 'seq-1', 'hash') returning id`
      const [job] = await sql`insert into reprocess_jobs (lab_id, instrument_id, selection, reason, state) values (${lab!.id}, ${inst!.id}, ${sql.json({})}, 'calibration re-fitted', 'done') returning id`
      for (const [i, at] of dated.entries()) {
        const [a] = await sql`insert into acquisitions (lab_id, instrument_id, external_id, acquired_at, status, body_hash, payload, point_count, created_at)
          values (${lab!.id}, ${inst!.id}, ${`run-${i}`}, ${at}, 'processed', 'hash', ${sql.json({})}, 10, ${at}) returning id`
        const result = async (version: number, supersedes: string | null) => (await sql`insert into results (acquisition_id, lab_id, geometry_version_id, engine_version, summary, version, supersedes, created_at)
          values (${a!.id}, ${lab!.id}, ${geo!.id}, 'e1', ${sql.json({})}, ${version}, ${supersedes}, ${at}) returning id`)[0]!.id as string
        const v1 = await result(1, null)
        await sql`insert into peaks (result_id, lab_id, mz, area) values (${v1}, ${lab!.id}, 44, 1), (${v1}, ${lab!.id}, 45, 0.01)`
        await sql`insert into sequence_items (sequence_id, position, acquisition_id, role) values (${seq!.id}, ${i + 1}, ${a!.id}, 'sample')`
        if (i !== 1) continue
        // October's acquisition was reprocessed (a version 2 with its peaks) and came as an upload.
        const v2 = await result(2, v1)
        await sql`update results set superseded_by = ${v2} where id = ${v1}`
        await sql`insert into peaks (result_id, lab_id, mz, area) values (${v2}, ${lab!.id}, 44.001, 1)`
        await sql`insert into reprocess_items (job_id, acquisition_id, ord, state, old_result_id, new_result_id) values (${job!.id}, ${a!.id}, 1, 'done', ${v1}, ${v2})`
        await sql`insert into uploads (lab_id, api_key_id, status, acquisition_id) values (${lab!.id}, ${key!.id}, 'processed', ${a!.id})`
      }
      before = await snapshot(sql)
      expect(before.results.length).toBe(4)
      expect(before.peaks.length).toBe(7)
    }, async (sql) => {
      // Every row is there with its id; nothing else changed.
      expect(await snapshot(sql)).toEqual(before)
      for (const t of ['acquisitions', 'results']) expect((await sql`select relkind from pg_class where relname = ${t}`)[0]!.relkind).toBe('p')
      // Each acquisition in its UTC month, each result in its acquisition's.
      const placed = await sql`select tableoid::regclass::text as part, to_char(created_at at time zone 'UTC', 'YYYY_MM') as month from acquisitions`
      expect(placed.map(p => p.part).sort()).toEqual(['acquisitions_2026_09', 'acquisitions_2026_10', 'acquisitions_2026_11'])
      for (const p of placed) expect(p.part).toBe(`acquisitions_${p.month}`)
      const results = await sql`select r.tableoid::regclass::text as part, r.acquisition_created_at = a.created_at as same, to_char(a.created_at at time zone 'UTC', 'YYYY_MM') as month
        from results r join acquisitions a on a.id = r.acquisition_id`
      expect(results.length).toBe(4)
      for (const r of results) expect(r).toMatchObject({ same: true, part: `results_${r.month}` })
      // The tables pointing at them carry their acquisition's created_at.
      const [peaks] = await sql`select count(*)::int as n, count(*) filter (where p.acquisition_created_at = r.acquisition_created_at)::int as same from peaks p join results r on r.id = p.result_id`
      expect(peaks).toEqual({ n: 7, same: 7 })
      for (const [table, n] of [['sequence_items', 3], ['reprocess_items', 1], ['uploads', 1], ['acquisition_runs', 3]] as const) {
        const [row] = await sql`select count(*)::int as n, count(*) filter (where t.acquisition_created_at = a.created_at)::int as same from ${sql(table)} t join acquisitions a on a.id = t.acquisition_id`
        expect({ table, ...row }).toEqual({ table, n, same: n })
      }
      // Run ids stay unique per lab, across months; the composite keys hold.
      const [lab] = await sql`select id from labs where slug = 'old-lab'`
      await expect(sql`insert into acquisition_runs (lab_id, external_id, acquisition_id, acquisition_created_at) values (${lab!.id}, 'run-0', gen_random_uuid(), now())`).rejects.toMatchObject({ code: '23505' })
      const v1 = before.results.find(r => r.version === 1)!
      await expect(sql`insert into peaks (result_id, acquisition_created_at, lab_id, mz, area) values (${v1.id}, '2020-01-01T00:00:00Z', ${lab!.id}, 1, 1)`).rejects.toMatchObject({ code: '23503' })
    })
  }, 120_000)
})

describe('monthly partitions on the running hub', () => {
  it('puts a delivery and its attempts in this month\'s partitions, as the worker sends and records them', async () => {
    const ctx = await grantedPartnerWithEndpoint(`http://127.0.0.1:${SINK_PORT}/now`)
    const res = await new ConsoleClient().request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 800), bearer(ctx.key.secret))
    expect(res.status).toBe(201)
    const sql = testDb()
    const delivery = await until('the delivery to succeed', async () =>
      (await sql<{ id: string, part: string }[]>`select id, tableoid::regclass::text as part from deliveries where endpoint_id = ${ctx.endpoint.id} and status = 'succeeded'`)[0])
    const month = monthOf(new Date()).replace('-', '_')
    expect(delivery!.part).toBe(`deliveries_${month}`)
    expect(await partitionOf(sql, 'delivery_attempts', sql`delivery_id = ${delivery!.id}`)).toEqual([`delivery_attempts_${month}`])
    expect(received.some(m => m.headers['webhook-id'] === delivery!.id)).toBe(true)
    // The delivery log still finds it by its id alone.
    const log = await ctx.admin.get(`/api/console/partners/${ctx.partner.id}/deliveries/${delivery!.id}`)
    expect(log.status).toBe(200)
    expect(log.body.attempts).toHaveLength(1)
  }, 60_000)

  it('puts an acquisition, its result and peaks in this month\'s partitions; its run id still replays or answers 409 once it sits in another month', async () => {
    const ctx = await labWithInstrument()
    const body = co2Acquisition(unique('run'), 800)
    const client = new ConsoleClient()
    const first = await client.request('POST', '/api/v1/acquisitions', body, bearer(ctx.key.secret))
    expect(first.status).toBe(201)
    const sql = testDb()
    const id = first.body.id as string
    try {
      const month = monthOf(new Date()).replace('-', '_')
      expect(await partitionOf(sql, 'acquisitions', sql`id = ${id}`)).toEqual([`acquisitions_${month}`])
      expect(await partitionOf(sql, 'results', sql`acquisition_id = ${id}`)).toEqual([`results_${month}`])
      const [peaks] = await sql`select count(*)::int as n from peaks p join results r on r.id = p.result_id and r.acquisition_created_at = p.acquisition_created_at where r.acquisition_id = ${id}`
      expect(peaks!.n).toBeGreaterThan(0)
      // Received in another month (a month without its partition: the default one).
      await redateAcquisitions(sql, [id], '2025-01-15T12:00:00.123Z')
      expect(await partitionOf(sql, 'acquisitions', sql`id = ${id}`)).toEqual(['acquisitions_default'])
      const again = await client.request('POST', '/api/v1/acquisitions', body, bearer(ctx.key.secret))
      expect(again.status).toBe(200)
      expect(again.body.id).toBe(id)
      const changed = await client.request('POST', '/api/v1/acquisitions', { ...body, sampleRef: 'OTHER' }, bearer(ctx.key.secret))
      expect(changed.status).toBe(409)
      expect(changed.body.errors[0].path).toBe('runId')
      expect((await sql`select count(*)::int as n from acquisitions where lab_id = ${ctx.lab.id}`)[0]!.n).toBe(1)
      // Read by its id alone, wherever it sits.
      const read = await client.request('GET', `/api/v1/acquisitions/${id}`, undefined, bearer(ctx.key.secret))
      expect(read.status).toBe(200)
      expect(read.body.result.id).toBe(first.body.result.id)
    }
    finally {
      await sql`delete from acquisitions where id = ${id}`
    }
  }, 60_000)

  it('moves an acquisition dated into a month without its partition, with its results, peaks, run id, sequence item, reprocess item and upload, when the month is made', async () => {
    const ctx = await labWithInstrument()
    const client = new ConsoleClient()
    const posted = await client.request('POST', '/api/v1/acquisitions', co2Acquisition(unique('run'), 800), bearer(ctx.key.secret))
    expect(posted.status).toBe(201)
    const sql = testDb()
    const id = posted.body.id as string
    const [seq] = await sql`insert into sequences (lab_id, instrument_id, external_id, body_hash) values (${ctx.lab.id}, ${ctx.instrument.id}, ${unique('seq')}, 'hash') returning id`
    const [job] = await sql`insert into reprocess_jobs (lab_id, instrument_id, selection, reason, state) values (${ctx.lab.id}, ${ctx.instrument.id}, ${sql.json({})}, 'test', 'done') returning id`
    try {
      await sql`insert into sequence_items (sequence_id, position, acquisition_id, acquisition_created_at, role) select ${seq!.id}, 1, id, created_at, 'sample' from acquisitions where id = ${id}`
      await sql`insert into reprocess_items (job_id, acquisition_id, acquisition_created_at, ord, state, old_result_id)
        select ${job!.id}, r.acquisition_id, r.acquisition_created_at, 1, 'done', r.id from results r where r.acquisition_id = ${id}`
      await sql`insert into uploads (lab_id, api_key_id, status, acquisition_id, acquisition_created_at) select lab_id, ${ctx.key.id}, 'processed', id, created_at from acquisitions where id = ${id}`
      const dependents = async () => {
        const out: Record<string, number> = {}
        out.peaks = (await sql`select count(*)::int as n from peaks where result_id in (select id from results where acquisition_id = ${id})`)[0]!.n
        for (const t of ['sequence_items', 'reprocess_items', 'uploads', 'acquisition_runs']) {
          out[t] = (await sql`select count(*)::int as n from ${sql(t)} t join acquisitions a on a.id = t.acquisition_id and a.created_at = t.acquisition_created_at where a.id = ${id}`)[0]!.n
        }
        return out
      }
      const kept = await dependents()
      expect(Object.values(kept).every(n => n > 0)).toBe(true)
      await redateAcquisitions(sql, [id], '2031-06-15T08:30:00.123456Z')
      expect(await partitionOf(sql, 'acquisitions', sql`id = ${id}`)).toEqual(['acquisitions_default'])
      expect(await partitionOf(sql, 'results', sql`acquisition_id = ${id}`)).toEqual(['results_default'])
      const report = command('db-partitions')
      expect(report).toContain('1 row(s) of acquisitions for 2031-06 sit in acquisitions_default')
      expect(report).toContain('1 row(s) of results for 2031-06 sit in results_default')
      const moved = command('db-partitions', ['--from', '2031-06'])
      expect(moved).toContain('acquisitions_2031_06, results_2031_06')
      expect(moved).toContain('moved 1 row(s) of acquisitions for 2031-06 out of acquisitions_default into their month')
      expect(moved).toContain('moved 1 row(s) of results for 2031-06 out of results_default into their month')
      expect(await partitionOf(sql, 'acquisitions', sql`id = ${id}`)).toEqual(['acquisitions_2031_06'])
      expect(await partitionOf(sql, 'results', sql`acquisition_id = ${id}`)).toEqual(['results_2031_06'])
      // Nothing pointing at them was lost on the way (the cascade would have taken peaks,
      // the reprocess item and the run id), and the microseconds survived.
      expect(await dependents()).toEqual(kept)
      const [at] = await sql`select to_char(created_at at time zone 'UTC', 'YYYY-MM-DD HH24:MI:SS.US') as t from acquisitions where id = ${id}`
      expect(at!.t).toBe('2031-06-15 08:30:00.123456')
      const read = await client.request('GET', `/api/v1/acquisitions/${id}`, undefined, bearer(ctx.key.secret))
      expect(read.status).toBe(200)
      expect(read.body.result.id).toBe(posted.body.result.id)
      // (Other test files' re-dated rows may sit in a default partition: this month's only.)
      expect(command('db-partitions')).not.toContain('for 2031-06 sit in')
    }
    finally {
      await sql`delete from sequences where id = ${seq!.id}`
      await sql`delete from uploads where acquisition_id = ${id}`
      await sql`delete from acquisitions where id = ${id}`
      await sql`delete from reprocess_jobs where id = ${job!.id}`
    }
  }, 120_000)

  it('keeps a row dated into a month without a partition in the default partition, reports it, and moves it when its month is made', async () => {
    const sql = testDb()
    const old = await oldDeliveries([{ createdAt: '2031-05-10T12:00:00Z', status: 'dead', attempts: 1 }])
    try {
      const id = old.ids[0]!
      expect(await partitionOf(sql, 'deliveries', sql`id = ${id}`)).toEqual(['deliveries_default'])
      expect(await partitionOf(sql, 'delivery_attempts', sql`delivery_id = ${id}`)).toEqual(['delivery_attempts_default'])
      const report = command('db-partitions')
      expect(report).toContain('1 row(s) of deliveries for 2031-05 sit in deliveries_default')
      expect(report).toContain('1 row(s) of delivery_attempts for 2031-05 sit in delivery_attempts_default')
      const sizes = JSON.parse(command('db-sizes', ['--json']))
      expect(sizes.inDefault).toEqual(expect.arrayContaining([{ table: 'deliveries', month: '2031-05', rows: 1 }, { table: 'delivery_attempts', month: '2031-05', rows: 1 }]))
      // Making the month moves the rows into it, and says so.
      const moved = command('db-partitions', ['--from', '2031-05'])
      expect(moved).toContain('partitions made: deliveries_2031_05, delivery_attempts_2031_05')
      expect(moved).toContain('moved 1 row(s) of deliveries for 2031-05 out of deliveries_default into their month')
      expect(moved).toContain('moved 1 row(s) of delivery_attempts for 2031-05 out of delivery_attempts_default into their month')
      expect(await partitionOf(sql, 'deliveries', sql`id = ${id}`)).toEqual(['deliveries_2031_05'])
      expect(await partitionOf(sql, 'delivery_attempts', sql`delivery_id = ${id}`)).toEqual(['delivery_attempts_2031_05'])
      const [row] = await sql`select status, attempts from deliveries where id = ${id}`
      expect(row).toMatchObject({ status: 'dead', attempts: 1 })
      expect(command('db-partitions')).not.toContain('for 2031-05 sit in')
    }
    finally {
      await sql`delete from webhook_endpoints where id = ${old.endpoint}`
    }
  }, 60_000)

  it('drops a month of attempts past its retention, then the month\'s deliveries, but never a month holding a pending delivery', async () => {
    const sql = testDb()
    command('db-partitions', ['--from', '2025-03'])
    command('db-partitions', ['--from', '2025-04'])
    const old = await oldDeliveries([
      { createdAt: '2025-03-05T08:00:00Z', status: 'succeeded', attempts: 2 },
      { createdAt: '2025-03-20T08:00:00Z', status: 'dead', attempts: 3 },
      { createdAt: '2025-04-02T08:00:00Z', status: 'pending', attempts: 1 },
    ])
    try {
      const [march1, march2, april] = old.ids as [string, string, string]
      expect(await partitionOf(sql, 'deliveries', sql`id = any(${old.ids}::uuid[])`)).toEqual(expect.arrayContaining(['deliveries_2025_03', 'deliveries_2025_04']))
      const attemptsOf = async (ids: string[]) => (await sql`select count(*)::int as n from delivery_attempts where delivery_id = any(${ids}::uuid[])`)[0]!.n as number
      // Three months of attempts, deliveries kept: March's attempts go, April's stay (pending).
      const first = command('db-partitions', ['--retention'], { NUXT_PARTITIONS_KEEP_ATTEMPT_MONTHS: '3' })
      expect(first).toContain('dropped delivery_attempts for 2025-03 (5 row(s))')
      expect(first).toContain('kept 2025-04: 1 pending delivery')
      expect(first).not.toContain('dropped deliveries')
      expect(await attemptsOf([march1, march2])).toBe(0)
      expect(await attemptsOf([april])).toBe(1)
      expect((await sql`select count(*)::int as n from deliveries where id = any(${old.ids}::uuid[])`)[0]!.n).toBe(3)
      // A replay's attempt for a March delivery still finds its month (made again, empty).
      const [d] = await sql`select created_at from deliveries where id = ${march2}`
      await sql`insert into delivery_attempts (delivery_id, delivery_created_at, number, duration_ms, class, request_headers) values (${march2}, ${d!.created_at}, 4, 5, 'success', ${sql.json(headers)})`
      expect(await partitionOf(sql, 'delivery_attempts', sql`delivery_id = ${march2}`)).toEqual(['delivery_attempts_2025_03'])
      // Two months of deliveries: March goes whole; April is kept while its delivery waits.
      const second = command('db-partitions', ['--retention'], { NUXT_PARTITIONS_KEEP_DELIVERY_MONTHS: '2' })
      expect(second).toContain('dropped deliveries for 2025-03 (2 row(s))')
      expect(second).toContain('kept 2025-04: 1 pending delivery')
      expect((await sql`select id from deliveries where id = any(${old.ids}::uuid[])`).map(r => r.id)).toEqual([april])
      expect(await attemptsOf([april])).toBe(1)
      const parts = (await sql`select c.relname from pg_inherits i join pg_class c on c.oid = i.inhrelid where c.relkind = 'r' and c.relname like 'deliver%2025_0%'`).map(r => r.relname)
      expect(parts.sort()).toEqual(['deliveries_2025_04', 'delivery_attempts_2025_04'])
      // Nothing of this month is touched.
      expect(command('db-partitions', ['--retention'], { NUXT_PARTITIONS_KEEP_DELIVERY_MONTHS: '1' })).not.toContain(`for ${monthOf(new Date())}`)
    }
    finally {
      await sql`delete from webhook_endpoints where id = ${old.endpoint}`
    }
  }, 120_000)

  it('prints each table\'s months with rows and bytes, a total, and the same as JSON', async () => {
    const sql = testDb()
    await sql`analyze deliveries`
    await sql`analyze delivery_attempts`
    const month = monthOf(new Date())
    const text = command('db-sizes')
    expect(text).toMatch(new RegExp(`^deliveries\\s+${month}\\s+\\d+\\s+\\d+\\s+\\d+\\.\\d\\d MB$`, 'm'))
    expect(text).toMatch(new RegExp(`^delivery_attempts\\s+${month}\\s+\\d+`, 'm'))
    expect(text).toMatch(/^deliveries\s+default\s/m)
    // Acquisitions and results by month too (this file's hub tests post acquisitions this month).
    expect(text).toMatch(new RegExp(`^acquisitions\\s+${month}\\s+\\d+\\s+\\d+`, 'm'))
    expect(text).toMatch(new RegExp(`^results\\s+${month}\\s+\\d+\\s+\\d+`, 'm'))
    expect(text).toMatch(/^acquisitions\s+default\s/m)
    expect(text).toMatch(/^total\s+\d+\s+\d+/m)
    const json = JSON.parse(command('db-sizes', ['--json']))
    const now = json.months.find((m: { table: string, month: string }) => m.table === 'deliveries' && m.month === month)
    const [{ n }] = await sql`select count(*)::int as n from ${sql(`deliveries_${month.replace('-', '_')}`)}` as unknown as [{ n: number }]
    expect(n).toBeGreaterThan(0)
    // The estimate after ANALYZE is the count; bytes include the indexes (more than one page).
    expect(now.rowEstimate).toBe(n)
    expect(now.bytes).toBeGreaterThan(8192)
    expect(json.total.bytes).toBe(json.tables.reduce((s: number, t: { bytes: number }) => s + t.bytes, 0))
    expect(json.tables.map((t: { table: string }) => t.table)).toEqual(['deliveries', 'delivery_attempts', 'acquisitions', 'results'])
  }, 60_000)
})

afterAll(async () => {
  // The months made by these tests for 2031 go too (nothing is in them now), children first.
  const sql = testDb()
  const made = ['2031_05', '2031_06'].flatMap(m => [['delivery_attempts', m], ['deliveries', m], ['results', m], ['acquisitions', m]].map(([t, month]) => [t!, `${t}_${month}`] as const))
  for (const [parent, part] of made) {
    if ((await sql`select 1 from pg_class where relname = ${part}`).length) {
      await sql.unsafe(`alter table ${parent} detach partition ${part}`)
      await sql.unsafe(`drop table ${part}`)
    }
  }
})
