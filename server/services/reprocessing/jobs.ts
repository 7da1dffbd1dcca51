import { and, desc, eq, inArray, sql, type SQL } from 'drizzle-orm'
import type { z } from 'zod'
import type { ReprocessJobInput, reprocessJobListQuery } from '#shared/schemas/reprocessing'
import { acquisitions, instruments, methods, reprocessItems, reprocessJobs, results, sequenceItems, sequences } from '../../database/schema'
import { kickReprocessing } from './worker'

// Reprocessing jobs as a lab manager starts, follows and cancels them. A job lists its items
// (one per selected acquisition, with the result version it started from) when it is created,
// so the worker resumes from the first pending item after a crash, and progress is
// total / processed / changed / failed over a fixed list.

type JobRow = typeof reprocessJobs.$inferSelect

/**
 * Creates a job over the acquisitions of one instrument that the selection names: time range
 * on acquiredAt, one sequence, or the sequences processed under one method version. Every
 * field is checked before anything is stored; a second queued or running job for the
 * instrument is 409 (the partial unique index decides when two requests race).
 */
export async function createReprocessJob(audit: AuditContext, labId: string, input: ReprocessJobInput) {
  const instrument = await useDb().query.instruments.findFirst({ where: and(eq(instruments.id, input.instrumentId), eq(instruments.labId, labId)), columns: { id: true, slug: true } })
  if (!instrument) throw fieldProblem('instrumentId', 'no instrument with this id in the lab')
  const conditions: SQL[] = [sql`a.lab_id = ${labId}::uuid`, sql`a.instrument_id = ${instrument.id}::uuid`]
  if (input.from) conditions.push(sql`a.acquired_at >= ${input.from.toISOString()}::timestamptz`)
  if (input.to) conditions.push(sql`a.acquired_at <= ${input.to.toISOString()}::timestamptz`)
  if (input.sequenceId) {
    const seq = await useDb().query.sequences.findFirst({ where: and(eq(sequences.id, input.sequenceId), eq(sequences.labId, labId), eq(sequences.instrumentId, instrument.id)), columns: { id: true } })
    if (!seq) throw fieldProblem('sequenceId', 'no sequence with this id on this instrument')
    conditions.push(sql`a.id in (select acquisition_id from ${sequenceItems} where sequence_id = ${seq.id}::uuid)`)
  }
  if (input.methodVersion !== undefined) {
    const method = await useDb().query.methods.findFirst({ where: and(eq(methods.instrumentId, instrument.id), eq(methods.version, input.methodVersion)), columns: { id: true } })
    if (!method) throw fieldProblem('methodVersion', 'this instrument has no method of this version')
    conditions.push(sql`a.id in (select si.acquisition_id from ${sequenceItems} si join ${sequences} s on s.id = si.sequence_id where s.method_id = ${method.id}::uuid)`)
  }
  if (await activeJobOf(instrument.id)) throw busy()
  const selection = {
    instrument: instrument.slug, instrumentId: instrument.id,
    from: input.from?.toISOString() ?? null, to: input.to?.toISOString() ?? null,
    sequenceId: input.sequenceId ?? null, methodVersion: input.methodVersion ?? null,
  }
  let job: JobRow
  try {
    job = await useDb().transaction(async (tx) => {
      const created = firstRow(await tx.insert(reprocessJobs).values({ labId, instrumentId: instrument.id, selection, reason: input.reason, createdBy: audit.actor.id }).returning())
      // Items in acquisition order, each with the newest version of its result as it stands now.
      const listed = await tx.execute<{ n: number }>(sql`
        with picked as (
          insert into ${reprocessItems} (job_id, acquisition_id, acquisition_created_at, ord, old_result_id)
          select ${created.id}::uuid, a.id, a.created_at, row_number() over (order by a.acquired_at, a.id), r.id
          from ${acquisitions} a
          join lateral (select id from ${results} where acquisition_id = a.id and acquisition_created_at = a.created_at order by version desc limit 1) r on true
          where ${sql.join(conditions, sql` and `)}
          returning 1)
        select count(*)::int as n from picked`)
      const total = Number(listed[0]?.n ?? 0)
      if (!total) throw fieldProblem(narrowestField(input), 'no processed acquisition of this instrument matches the selection')
      await tx.update(reprocessJobs).set({ total }).where(eq(reprocessJobs.id, created.id))
      await recordAudit(tx, { ...audit, action: 'reprocess.job-created', targetType: 'reprocess_job', targetId: created.id, detail: { labId, selection, reason: input.reason, total } })
      return { ...created, total }
    })
  }
  catch (error) {
    if (pgErrorCode(error) === '23505') throw busy()
    throw error
  }
  kickReprocessing()
  return jobView(job, instrument.slug)
}

function narrowestField(input: ReprocessJobInput) {
  if (input.sequenceId) return 'sequenceId'
  if (input.methodVersion !== undefined) return 'methodVersion'
  if (input.from || input.to) return input.from ? 'from' : 'to'
  return 'instrumentId'
}

function busy() {
  return fieldProblem('instrumentId', 'this instrument already has a reprocessing job queued or running; wait for it or cancel it', 409, 'reprocess-job-active')
}

async function activeJobOf(instrumentId: string) {
  return useDb().query.reprocessJobs.findFirst({ where: and(eq(reprocessJobs.instrumentId, instrumentId), inArray(reprocessJobs.state, ['queued', 'running'])), columns: { id: true } })
}

/** A job as the console shows it: its selection, reason, state and progress. */
export function jobView(job: JobRow, instrument: string) {
  return {
    id: job.id,
    instrumentId: job.instrumentId,
    instrument,
    selection: job.selection,
    reason: job.reason,
    state: job.state,
    progress: { total: job.total, processed: job.processed, changed: job.changed, unchanged: job.processed - job.changed - job.failed, failed: job.failed },
    error: job.error,
    createdBy: job.createdBy,
    createdAt: job.createdAt.toISOString(),
    startedAt: job.startedAt?.toISOString() ?? null,
    finishedAt: job.finishedAt?.toISOString() ?? null,
  }
}

export async function listReprocessJobs(labId: string, query: z.output<typeof reprocessJobListQuery>) {
  const conditions: SQL[] = [eq(reprocessJobs.labId, labId)]
  if (query.state) conditions.push(eq(reprocessJobs.state, query.state))
  if (query.instrumentId) conditions.push(eq(reprocessJobs.instrumentId, query.instrumentId))
  const rows = await useDb().select({ job: reprocessJobs, slug: instruments.slug }).from(reprocessJobs)
    .innerJoin(instruments, eq(instruments.id, reprocessJobs.instrumentId))
    .where(and(...conditions)).orderBy(desc(reprocessJobs.createdAt), desc(reprocessJobs.id)).limit(100)
  return { items: rows.map(r => jobView(r.job, r.slug)) }
}

/** One job with its progress and the items that changed or failed (the first 500 of each, in order). */
export async function getReprocessJob(labId: string, jobId: string) {
  const [row] = await useDb().select({ job: reprocessJobs, slug: instruments.slug }).from(reprocessJobs)
    .innerJoin(instruments, eq(instruments.id, reprocessJobs.instrumentId))
    .where(and(eq(reprocessJobs.id, jobId), eq(reprocessJobs.labId, labId))).limit(1)
  if (!row) throw problem(404, 'reprocess-job-not-found', 'No such reprocessing job in this lab.')
  const items = await useDb().execute<{ acquisition_id: string, run_id: string, acquired_at: string, state: string, changed: boolean | null, error: string | null, old_version: number | null, new_version: number | null, new_result_id: string | null, review_state: string | null }>(sql`
    select i.acquisition_id, a.external_id as run_id, a.acquired_at::text as acquired_at, i.state, i.changed, i.error,
           o.version as old_version, n.version as new_version, i.new_result_id, n.review_state::text as review_state
    from ${reprocessItems} i
    join ${acquisitions} a on a.id = i.acquisition_id
    left join ${results} o on o.id = i.old_result_id
    left join ${results} n on n.id = i.new_result_id
    where i.job_id = ${jobId}::uuid and (i.changed or i.state = 'failed')
    order by i.ord limit 500`)
  return {
    ...jobView(row.job, row.slug),
    items: [...items].map(i => ({
      acquisitionId: i.acquisition_id, runId: i.run_id, acquiredAt: new Date(i.acquired_at).toISOString(), state: i.state, changed: i.changed,
      error: i.error, oldVersion: i.old_version, newVersion: i.new_version, newResultId: i.new_result_id, reviewState: i.review_state,
    })),
  }
}

/**
 * Cancels a queued or running job: the worker stops at its next batch (the batch's own
 * transaction checks the state), versions already written stay, held for review.
 */
export async function cancelReprocessJob(audit: AuditContext, labId: string, jobId: string) {
  return useDb().transaction(async (tx) => {
    const [job] = await tx.update(reprocessJobs).set({ state: 'cancelled', finishedAt: new Date(), leaseOwner: null, leaseUntil: null })
      .where(and(eq(reprocessJobs.id, jobId), eq(reprocessJobs.labId, labId), inArray(reprocessJobs.state, ['queued', 'running']))).returning()
    if (!job) {
      const exists = await tx.query.reprocessJobs.findFirst({ where: and(eq(reprocessJobs.id, jobId), eq(reprocessJobs.labId, labId)), columns: { state: true } })
      if (!exists) throw problem(404, 'reprocess-job-not-found', 'No such reprocessing job in this lab.')
      throw problem(409, 'reprocess-job-finished', `The job is ${exists.state}: only a queued or running job can be cancelled.`)
    }
    await recordAudit(tx, { ...audit, action: 'reprocess.job-cancelled', targetType: 'reprocess_job', targetId: job.id, detail: { labId, processed: job.processed, total: job.total } })
    const instrument = (await tx.query.instruments.findFirst({ where: eq(instruments.id, job.instrumentId), columns: { slug: true } }))!
    return jobView(job, instrument.slug)
  })
}
