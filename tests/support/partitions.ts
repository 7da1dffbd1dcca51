import type postgres from 'postgres'

// Acquisitions are partitioned by created_at (drizzle/0021_acquisition-partitions.sql), and
// results, peaks, reprocess items, sequence items, uploads and acquisition_runs carry it in
// composite foreign keys: an UPDATE of acquisitions.created_at is refused (the foreign keys
// say ON UPDATE NO ACTION). A test that needs an acquisition received earlier moves it, with
// everything pointing at it, in one transaction: set aside, deleted, put back re-dated.

/** The tables pointing at acquisitions (by acquisition_id) or results (peaks, by result_id), children last. */
const BY_ACQUISITION = ['acquisition_runs', 'reprocess_items', 'sequence_items', 'uploads'] as const

/**
 * Gives these acquisitions (ids) the created_at `createdAt` (an ISO timestamp), with their
 * results and dependents. The value is sent as text: a parameter PostgreSQL infers as
 * timestamptz is serialised by postgres.js through a JS Date, which drops the microseconds
 * (the partitions test saw .123456 stored as .123).
 */
export async function redateAcquisitions(sql: postgres.Sql, ids: string[], createdAt: string) {
  if (!ids.length) return
  await sql.begin(async (tx) => {
    await tx`create temporary table redate_acquisitions on commit drop as select * from acquisitions where id in ${tx(ids)}`
    await tx`create temporary table redate_results on commit drop as select * from results where acquisition_id in ${tx(ids)}`
    await tx`create temporary table redate_peaks on commit drop as select * from peaks where result_id in (select id from redate_results)`
    for (const t of BY_ACQUISITION) await tx.unsafe(`create temporary table redate_${t} on commit drop as select * from ${t} where acquisition_id = any($1::uuid[])`, [ids])
    await tx`delete from peaks where result_id in (select id from redate_results)`
    for (const t of BY_ACQUISITION) await tx.unsafe(`delete from ${t} where acquisition_id = any($1::uuid[])`, [ids])
    await tx`delete from results where acquisition_id in ${tx(ids)}`
    await tx`delete from acquisitions where id in ${tx(ids)}`
    await tx`update redate_acquisitions set created_at = ${createdAt}::text::timestamptz`
    await tx`update redate_results set acquisition_created_at = ${createdAt}::text::timestamptz`
    await tx`update redate_peaks set acquisition_created_at = ${createdAt}::text::timestamptz`
    for (const t of BY_ACQUISITION) await tx.unsafe(`update redate_${t} set acquisition_created_at = $1::text::timestamptz`, [createdAt])
    await tx`insert into acquisitions select * from redate_acquisitions`
    await tx`insert into results select * from redate_results`
    await tx`insert into peaks select * from redate_peaks`
    for (const t of BY_ACQUISITION) await tx.unsafe(`insert into ${t} select * from redate_${t}`)
  })
}
