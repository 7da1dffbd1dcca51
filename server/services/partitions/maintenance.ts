import type postgres from 'postgres'

// Monthly partitions (issue 23, point 4; drizzle/0019_monthly-partitions.sql), written against
// postgres.js so that worker processes (on a timer, partitions/jobs.ts) and the commands (npm
// run db:partitions, npm run db:sizes) run the same code. No Nitro imports here.
//
// A family is a parent table and the tables partitioned by the parent's month alongside it:
// delivery_attempts by its delivery's created_at (delivery_created_at, in the foreign key). A
// month's partitions of a family are made together and dropped together (children first), so a
// child's month exists exactly when its parent's does. Months are UTC calendar months; a
// partition is named <table>_YYYY_MM, and each table has a <table>_default partition for rows
// that no month holds (nothing is ever refused for want of a partition).

//
// Acquisitions and results (drizzle/0021_acquisition-partitions.sql) are such a family: a
// result lives in its acquisition's month. Unpartitioned tables point at them with composite
// foreign keys (their `dependents`); when rows move out of a default partition into their
// new month, the rows pointing at them are set aside and put back too, or the cascade would
// delete them (peaks, reprocess items, run ids) or the foreign key refuse the move.

interface Dependent {
  table: string
  /** Which of its rows point at the moving rows (moving_<table> temporary tables of the family). */
  pointsAt: string
}

interface Family {
  parent: { table: string, key: string }
  children: { table: string, key: string }[]
  dependents: Dependent[]
}

const ofMovingAcquisitions = '(acquisition_id, acquisition_created_at) in (select id, created_at from moving_acquisitions)'

export const families: Family[] = [
  { parent: { table: 'deliveries', key: 'created_at' }, children: [{ table: 'delivery_attempts', key: 'delivery_created_at' }], dependents: [] },
  {
    parent: { table: 'acquisitions', key: 'created_at' },
    children: [{ table: 'results', key: 'acquisition_created_at' }],
    dependents: [
      { table: 'peaks', pointsAt: '(result_id, acquisition_created_at) in (select id, acquisition_created_at from moving_results)' },
      { table: 'reprocess_items', pointsAt: ofMovingAcquisitions },
      { table: 'sequence_items', pointsAt: ofMovingAcquisitions },
      { table: 'uploads', pointsAt: ofMovingAcquisitions },
      // By its primary key: acquisition_runs has no index by acquisition.
      { table: 'acquisition_runs', pointsAt: '(lab_id, external_id) in (select lab_id, external_id from moving_acquisitions)' },
    ],
  },
]

/** Every partitioned table, parents before children. */
export const partitionedTables = families.flatMap(f => [f.parent.table, ...f.children.map(c => c.table)])

// Serialises partition changes across processes (keyed by a name, as the sequences' locks are).
const PARTITION_LOCK = 'arcwise:partitions'
// A partition change takes an ACCESS EXCLUSIVE lock on its parent; while it waits, every query
// of that table queues behind it. It gives up after this and is tried again on the next run.
const LOCK_TIMEOUT = '5s'

/** 'YYYY-MM' of a month counted from `now`'s UTC month (offset 0: this month). */
export function monthOf(now: Date, offset = 0): string {
  const d = new Date(Date.UTC(now.getUTCFullYear(), now.getUTCMonth() + offset, 1))
  return `${d.getUTCFullYear()}-${String(d.getUTCMonth() + 1).padStart(2, '0')}`
}

/** The month's bounds as timestamptz literals: [from, to). */
export function monthBounds(month: string): { from: string, to: string } {
  const [y, m] = month.split('-').map(Number) as [number, number]
  const next = new Date(Date.UTC(y, m, 1))
  return { from: `${month}-01 00:00:00+00`, to: `${next.toISOString().slice(0, 10)} 00:00:00+00` }
}

export const partitionName = (table: string, month: string) => `${table}_${month.replace('-', '_')}`

/** The month a partition's name says ('YYYY-MM'), 'default', or null for a partition of another name. */
export function monthOfPartition(table: string, partition: string): string | null {
  if (partition === `${table}_default`) return 'default'
  const rest = partition.startsWith(`${table}_`) ? partition.slice(table.length + 1) : ''
  return /^\d{4}_\d{2}$/.test(rest) ? rest.replace('_', '-') : null
}

/** The partitions of `table` by name, with the month their name says. */
export async function partitionsOf(sql: postgres.Sql | postgres.TransactionSql, table: string) {
  const rows = await sql<{ name: string }[]>`
    select c.relname as name from pg_inherits i
    join pg_class c on c.oid = i.inhrelid join pg_class p on p.oid = i.inhparent
    join pg_namespace n on n.oid = p.relnamespace
    where p.relname = ${table} and n.nspname = current_schema()
    order by c.relname`
  return rows.map(r => ({ name: r.name, month: monthOfPartition(table, r.name) }))
}

export interface DefaultRows { table: string, month: string, rows: number }

/** Rows in each table's default partition, by the month they belong to. */
export async function defaultPartitionRows(sql: postgres.Sql): Promise<DefaultRows[]> {
  const out: DefaultRows[] = []
  for (const f of families) {
    for (const t of [f.parent, ...f.children]) {
      const rows = await sql<{ month: string, rows: number }[]>`
        select to_char(date_trunc('month', ${sql(t.key)} at time zone 'UTC'), 'YYYY-MM') as month, count(*)::int as rows
        from ${sql(`${t.table}_default`)} group by 1 order by 1`
      out.push(...rows.map(r => ({ table: t.table, month: r.month, rows: r.rows })))
    }
  }
  return out
}

export interface MonthsOutcome {
  /** Partitions made, by name. */
  created: string[]
  /** Rows moved out of a default partition into their new month (each also logged by the caller). */
  moved: DefaultRows[]
  /** Months that could not be made now (a lock not had in time); tried again on the next run. */
  deferred: { month: string, reason: string }[]
}

/**
 * Makes every family's partitions from this month to `monthsAhead` months after it. Rows that
 * a default partition holds for such a month (the job had not run in time) are moved into the
 * new month in the same transaction, children first out and last in, and reported: the default
 * partition keeps only rows of months that have no partition.
 */
export async function ensureMonths(sql: postgres.Sql, opts: { monthsAhead?: number, now?: Date, from?: string } = {}): Promise<MonthsOutcome> {
  const now = opts.now ?? new Date()
  const ahead = opts.monthsAhead ?? 2
  const months = Array.from({ length: ahead + 1 }, (_, i) => monthOf(now, i))
  if (opts.from && !months.includes(opts.from)) months.unshift(opts.from)
  const outcome: MonthsOutcome = { created: [], moved: [], deferred: [] }
  for (const family of families) {
    for (const month of months) {
      try { await makeMonth(sql, family, month, outcome) }
      catch (error) {
        // 55P03: lock_not_available (the lock timeout).
        if ((error as { code?: string }).code !== '55P03') throw error
        outcome.deferred.push({ month, reason: `${family.parent.table} was busy for ${LOCK_TIMEOUT}` })
      }
    }
  }
  return outcome
}

async function makeMonth(sql: postgres.Sql, family: Family, month: string, outcome: MonthsOutcome) {
  const tables = [family.parent, ...family.children]
  await sql.begin(async (tx) => {
    await tx`select pg_advisory_xact_lock(hashtext(${PARTITION_LOCK}))`
    await tx.unsafe(`set local lock_timeout = '${LOCK_TIMEOUT}'`)
    const missing: typeof tables = []
    for (const t of tables) {
      if (!(await partitionsOf(tx, t.table)).some(p => p.month === month)) missing.push(t)
    }
    if (!missing.length) return
    await lockFamily(tx, family)
    const { from, to } = monthBounds(month)
    // Rows of this month in the default partitions, kept aside: the rows pointing at them
    // (dependents) out first, then children, then parents, so nothing cascades and no foreign
    // key refuses; put back in the opposite order.
    const held: { table: string, temp: string, rows: number }[] = []
    for (const t of tables) {
      const temp = `moving_${t.table}`
      await tx.unsafe(`create temporary table ${temp} on commit drop as select * from ${t.table}_default where ${t.key} >= '${from}' and ${t.key} < '${to}'`)
      held.push({ table: t.table, temp, rows: 0 })
    }
    const rowsHeld = Number((await tx.unsafe<[{ n: string }]>(`select (select count(*) from moving_${family.parent.table}) as n`))[0].n)
    // Only when there is something to move (a month made late): the check reads the dependents.
    const aside = rowsHeld ? family.dependents : []
    for (const d of aside) {
      const temp = `moving_${d.table}`
      await tx.unsafe(`create temporary table ${temp} on commit drop as select * from ${d.table} where ${d.pointsAt}`)
      const deleted = await tx.unsafe(`delete from ${d.table} where ${d.pointsAt}`)
      held.push({ table: d.table, temp, rows: deleted.count })
    }
    for (const t of [...tables].reverse()) {
      const deleted = await tx.unsafe(`delete from ${t.table}_default where ${t.key} >= '${from}' and ${t.key} < '${to}'`)
      held.find(h => h.table === t.table)!.rows = deleted.count
    }
    for (const t of missing) {
      const name = partitionName(t.table, month)
      await tx.unsafe(`create table ${name} partition of ${t.table} for values from ('${from}') to ('${to}')`)
      outcome.created.push(name)
    }
    for (const h of held) {
      if (!h.rows) continue
      await tx.unsafe(`insert into ${h.table} select * from ${h.temp}`)
      // Dependents are not partitioned: they were put back, not moved.
      if (partitionedTables.includes(h.table)) outcome.moved.push({ table: h.table, month, rows: h.rows })
    }
  })
}

/**
 * Detaching or making a partition locks its parent ACCESS EXCLUSIVE; the family's tables are
 * locked first, parent before children, the order in which the worker's record (deliveries,
 * then attempts) and every writer take them, so the change cannot deadlock with a writer.
 */
async function lockFamily(tx: postgres.TransactionSql, family: Family) {
  await tx.unsafe(`lock table ${[family.parent, ...family.children].map(t => t.table).join(', ')} in access exclusive mode`)
}

export interface RetentionSettings {
  /** Months of delivery attempts kept, this month included (0: all). */
  attemptMonths: number
  /** Months of deliveries kept, this month included (0: all). */
  deliveryMonths: number
}

export interface PartitionRetentionOutcome {
  /** Partitions detached and dropped, with the rows they held. */
  dropped: { table: string, month: string, rows: number }[]
  /** Months past their retention kept because a delivery in them is still pending. */
  keptPending: { month: string, pending: number }[]
  deferred: { month: string, reason: string }[]
}

/**
 * Drops whole months of delivery attempts and deliveries past their retention (DETACH, then
 * DROP). A month holding a pending delivery is never dropped: the check runs after the
 * month's deliveries are locked against change, so a replay cannot make one pending meanwhile.
 * A month's attempts go with or before its deliveries (the foreign key, and attempts sit in
 * their delivery's month); when only the attempts go, an empty month of attempts takes their
 * place, so a later replay's attempt lands in its month rather than the default partition.
 * Acquisitions and results are partitioned too but never dropped here: they are the labs'
 * records (DEVELOPERS.md, Monthly partitions).
 */
export async function applyPartitionRetention(sql: postgres.Sql, settings: RetentionSettings, opts: { now?: Date } = {}): Promise<PartitionRetentionOutcome> {
  const now = opts.now ?? new Date()
  const outcome: PartitionRetentionOutcome = { dropped: [], keptPending: [], deferred: [] }
  const keepFrom = (n: number) => n > 0 ? monthOf(now, -(n - 1)) : null
  const deliveriesFrom = keepFrom(settings.deliveryMonths)
  // Attempts cannot outlive their deliveries.
  const attemptsFrom = [keepFrom(settings.attemptMonths), deliveriesFrom].filter((m): m is string => m !== null).sort().at(-1) ?? null
  if (!attemptsFrom) return outcome
  // Deliveries only: acquisitions and results are the labs' records, never dropped here.
  const family = families.find(f => f.parent.table === 'deliveries')!
  const child = family.children[0]!
  const months = (await partitionsOf(sql, child.table)).map(p => p.month).filter((m): m is string => m !== null && m !== 'default' && m < attemptsFrom)
  for (const month of months) {
    const dropDeliveries = deliveriesFrom !== null && month < deliveriesFrom
    const parentPart = partitionName(family.parent.table, month)
    const childPart = partitionName(child.table, month)
    const parentThere = (await partitionsOf(sql, family.parent.table)).some(p => p.name === parentPart)
    // Looked at before any lock is taken, so that a month kept for its pending deliveries, or
    // an emptied month of attempts, costs the tables no lock on every run.
    if (parentThere) {
      const [{ pending }] = await sql.unsafe<[{ pending: number }]>(`select count(*)::int as pending from ${parentPart} where status = 'pending'`)
      if (pending > 0) { outcome.keptPending.push({ month, pending }); continue }
    }
    if (!dropDeliveries && parentThere && !(await sql.unsafe(`select 1 from ${childPart} limit 1`)).length) continue
    try {
      await sql.begin(async (tx) => {
        await tx`select pg_advisory_xact_lock(hashtext(${PARTITION_LOCK}))`
        await tx.unsafe(`set local lock_timeout = '${LOCK_TIMEOUT}'`)
        // Locked, then checked again: no replay can make a delivery of the month pending meanwhile.
        await lockFamily(tx, family)
        if (!(await partitionsOf(tx, child.table)).some(p => p.name === childPart)) return
        if (parentThere) {
          const [{ pending }] = await tx.unsafe<[{ pending: number }]>(`select count(*)::int as pending from ${parentPart} where status = 'pending'`)
          if (pending > 0) { outcome.keptPending.push({ month, pending }); return }
        }
        const dropped: PartitionRetentionOutcome['dropped'] = []
        const [{ rows }] = await tx.unsafe<[{ rows: number }]>(`select count(*)::int as rows from ${childPart}`)
        await tx.unsafe(`alter table ${child.table} detach partition ${childPart}`)
        await tx.unsafe(`drop table ${childPart}`)
        dropped.push({ table: child.table, month, rows })
        if (dropDeliveries && parentThere) {
          const [{ rows: n }] = await tx.unsafe<[{ rows: number }]>(`select count(*)::int as rows from ${parentPart}`)
          await tx.unsafe(`alter table ${family.parent.table} detach partition ${parentPart}`)
          await tx.unsafe(`drop table ${parentPart}`)
          dropped.push({ table: family.parent.table, month, rows: n })
        }
        else if (parentThere) {
          const { from, to } = monthBounds(month)
          await tx.unsafe(`create table ${childPart} partition of ${child.table} for values from ('${from}') to ('${to}')`)
        }
        outcome.dropped.push(...dropped)
      })
    }
    catch (error) {
      if ((error as { code?: string }).code !== '55P03') throw error
      outcome.deferred.push({ month, reason: `${family.parent.table} was busy for ${LOCK_TIMEOUT}` })
    }
  }
  return outcome
}

export interface SizeRow {
  table: string
  /** 'YYYY-MM', 'default', or the partition's name when it follows no month. */
  month: string
  partition: string
  /** PostgreSQL's estimate (pg_class.reltuples; exact after ANALYZE), not a count. */
  rowEstimate: number
  /** The partition with its indexes and TOAST (pg_total_relation_size). */
  bytes: number
}

/** Each partitioned table's partitions by month: estimated rows and bytes. */
export async function partitionSizes(sql: postgres.Sql): Promise<SizeRow[]> {
  const out: SizeRow[] = []
  for (const table of partitionedTables) {
    const rows = await sql<{ name: string, estimate: number, bytes: string }[]>`
      select c.relname as name, c.reltuples::float8 as estimate, pg_total_relation_size(c.oid)::text as bytes
      from pg_inherits i join pg_class c on c.oid = i.inhrelid join pg_class p on p.oid = i.inhparent
      join pg_namespace n on n.oid = p.relnamespace
      where p.relname = ${table} and n.nspname = current_schema()`
    for (const r of rows) {
      // -1: never analyzed (a new or small partition), so counted instead.
      const estimate = r.estimate >= 0 ? r.estimate : (await sql<[{ n: number }]>`select count(*)::int as n from ${sql(r.name)}`)[0].n
      out.push({ table, month: monthOfPartition(table, r.name) ?? r.name, partition: r.name, rowEstimate: Math.round(estimate), bytes: Number(r.bytes) })
    }
  }
  return out.sort((a, b) => partitionedTables.indexOf(a.table) - partitionedTables.indexOf(b.table) || a.month.localeCompare(b.month))
}
