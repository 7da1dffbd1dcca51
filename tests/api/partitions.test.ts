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
import { bearer, co2Acquisition } from '../support/lab'
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

describe('the migration to monthly partitions', () => {
  it('converts a database holding deliveries and attempts from the migration before it without losing or renumbering a row', async () => {
    const name = 'arcwise_parts_migration'
    const adminUrl = new URL(testEnv().databaseUrl)
    adminUrl.pathname = '/postgres'
    const admin = postgres(adminUrl.toString(), { max: 1, onnotice: () => {} })
    await admin.unsafe(`drop database if exists ${name} with (force)`)
    await admin.unsafe(`create database ${name}`)
    const url = new URL(testEnv().databaseUrl)
    url.pathname = `/${name}`
    // Migrations up to 0018 only: the database as it was before this one.
    const before = mkdtempSync(join(tmpdir(), 'arcwise-drizzle-'))
    cpSync(join(rootDir, 'drizzle'), before, { recursive: true })
    const journal = JSON.parse(readFileSync(join(before, 'meta', '_journal.json'), 'utf8'))
    const last = journal.entries.findIndex((e: { tag: string }) => e.tag === '0019_monthly-partitions')
    expect(last).toBeGreaterThan(0)
    journal.entries = journal.entries.slice(0, last)
    writeFileSync(join(before, 'meta', '_journal.json'), JSON.stringify(journal))
    // A session time zone far from UTC: months are UTC months whatever the session says.
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
      const [lab] = await sql`insert into labs (slug, name, site, contact_email) values ('old-lab', 'Old Lab', 'Site', 'lab@example.org') returning id`
      const [partner] = await sql`insert into partners (slug, name, kind, contact_email) values ('old-partner', 'Old Partner', 'data_team', 'p@example.org') returning id`
      const [endpoint] = await sql`insert into webhook_endpoints (partner_id, url, event_types, sealed_secret) values (${partner!.id}, 'https://example.org/hook', ${['result.released']}, 'sealed') returning id`
      const dated = ['2026-09-15T10:00:00Z', '2026-10-31T23:59:59.999Z', '2026-11-01T00:00:00Z', new Date().toISOString()]
      for (const [i, at] of dated.entries()) {
        const [event] = await sql`insert into events (lab_id, sequence, type, payload, created_at) values (${lab!.id}, ${i + 1}, 'result.released', ${sql.json({ id: `acq-${i}` })}, ${at}) returning id`
        const [d] = await sql`insert into deliveries (endpoint_id, event_id, event_type, status, attempts, created_at) values (${endpoint!.id}, ${event!.id}, 'result.released', ${i === 3 ? 'pending' : 'succeeded'}, ${i === 3 ? 0 : 2}, ${at}) returning id`
        for (const n of i === 3 ? [] : [1, 2]) await sql`insert into delivery_attempts (delivery_id, number, duration_ms, class, request_headers) values (${d!.id}, ${n}, 5, 'success', ${sql.json(headers)})`
      }
      // Plain rows: a result also carries its columns' table oids, which the migration changes.
      const plain = (rows: postgres.RowList<postgres.Row[]>) => rows.map(r => ({ ...r }))
      const oldDeliveries = plain(await sql`select id, created_at, status, attempts from deliveries order by id`)
      const oldAttempts = plain(await sql`select id, delivery_id, number from delivery_attempts order by id`)
      expect(oldDeliveries.length).toBe(4)
      expect(oldAttempts.length).toBe(6)

      await migrateWith(join(rootDir, 'drizzle'))

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
    }
    finally {
      await sql.end()
      rmSync(before, { recursive: true, force: true })
      await admin.unsafe(`drop database if exists ${name} with (force)`)
      await admin.end()
    }
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
      expect(command('db-partitions')).not.toContain('sit in')
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
      const parts = (await sql`select c.relname from pg_inherits i join pg_class c on c.oid = i.inhrelid where c.relkind = 'r' and c.relname like '%2025_0%'`).map(r => r.relname)
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
    expect(text).toMatch(/^total\s+\d+\s+\d+/m)
    const json = JSON.parse(command('db-sizes', ['--json']))
    const now = json.months.find((m: { table: string, month: string }) => m.table === 'deliveries' && m.month === month)
    const [{ n }] = await sql`select count(*)::int as n from ${sql(`deliveries_${month.replace('-', '_')}`)}` as unknown as [{ n: number }]
    expect(n).toBeGreaterThan(0)
    // The estimate after ANALYZE is the count; bytes include the indexes (more than one page).
    expect(now.rowEstimate).toBe(n)
    expect(now.bytes).toBeGreaterThan(8192)
    expect(json.total.bytes).toBe(json.tables.reduce((s: number, t: { bytes: number }) => s + t.bytes, 0))
    expect(json.tables.map((t: { table: string }) => t.table)).toEqual(['deliveries', 'delivery_attempts'])
  }, 60_000)
})

afterAll(async () => {
  // The months made by these tests for 2031 go too (nothing is in them now).
  const sql = testDb()
  for (const [parent, part] of [['delivery_attempts', 'delivery_attempts_2031_05'], ['deliveries', 'deliveries_2031_05']] as const) {
    if ((await sql`select 1 from pg_class where relname = ${part}`).length) {
      await sql.unsafe(`alter table ${parent} detach partition ${part}`)
      await sql.unsafe(`drop table ${part}`)
    }
  }
})
