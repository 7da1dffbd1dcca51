import { and, asc, desc, eq, gt, inArray, lt, lte, sql } from 'drizzle-orm'
import { alias } from 'drizzle-orm/pg-core'
import { isError } from 'h3'
import { acquisitions, instruments, labs, methods, reprocessJobs, results, users } from '../../database/schema'
import { kickDeliveries, recordLabEvent } from '../delivery'
import { acquisitionHead, resultView, reviewOf } from '../results'

// Review of results (ISO/IEC 17025:2017 §7.8.1: results are reviewed and authorised before
// release; §7.8.8: an amended report names the one it replaces and why). A result is held
// when computed, unless the lab's rule releases it; a reviewer of the lab releases or rejects
// it, and may later retract a released one. Each decision is audited, and partners hear of
// releases, corrections and retractions through the lab's events.

export const RESULT_RELEASED = 'result.released'
export const RESULT_CORRECTED = 'result.corrected'
export const RESULT_RETRACTED = 'result.retracted'

export interface ReleaseOptions {
  /** The lab the caller acts in: another lab's result answers 404, as a missing one does. */
  labId?: string
  /** The reviewer's note, kept with the result. */
  comment?: string | null
  /** Released by the lab's rule, not by a person: no four-eyes check, and reviewedBy stays null. */
  automatic?: boolean
}

const submitter = alias(users, 'submitter')

/**
 * Locks the acquisition a result belongs to (FOR UPDATE on its row) before anything else is
 * read: every release and retraction of any version of one acquisition then runs one after
 * the other, so two versions released at once cannot both miss each other (two
 * result.released, or an older version released over a newer one). A result that is not
 * there answers 404 later, in lockResult.
 */
async function lockAcquisitionOf(tx: Queryable, resultId: string) {
  await tx.execute(sql`select 1 from ${acquisitions} where id = (select acquisition_id from ${results} where id = ${resultId}::uuid) for update`)
}

async function lockResult(tx: Queryable, resultId: string, labId?: string) {
  const [row] = await tx.select({
    res: results, acq: acquisitionHead, slug: instruments.slug, fourEyes: labs.fourEyes, jobCreatedBy: reprocessJobs.createdBy,
  }).from(results)
    .innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .innerJoin(labs, eq(labs.id, results.labId))
    .leftJoin(reprocessJobs, eq(reprocessJobs.id, results.reprocessJobId))
    .where(and(eq(results.id, resultId), labId ? eq(results.labId, labId) : undefined))
    .for('update', { of: results })
  if (!row) throw problem(404, 'result-not-found', 'No such result in this lab.')
  return row
}
type LockedResult = Awaited<ReturnType<typeof lockResult>>

/**
 * The four-eyes rule (when the lab keeps it): whoever uploaded the acquisition, started the
 * reprocessing that produced this version, or registered the method version in force at the
 * acquisition's time may not release it; another reviewer must.
 */
async function checkFourEyes(tx: Queryable, row: LockedResult, reviewerId: string | null) {
  if (!row.fourEyes || !reviewerId) return
  if (row.acq.submittedBy === reviewerId) throw problem(403, 'four-eyes', 'You uploaded this acquisition; under the lab\'s four-eyes rule another reviewer must release it.')
  if (row.jobCreatedBy === reviewerId) throw problem(403, 'four-eyes', 'You started the reprocessing that produced this version; under the lab\'s four-eyes rule another reviewer must release it.')
  const [method] = await tx.select({ createdBy: methods.createdBy }).from(methods)
    .where(and(eq(methods.instrumentId, row.acq.instrumentId), lte(methods.validFrom, row.acq.acquiredAt)))
    .orderBy(desc(methods.validFrom), desc(methods.version)).limit(1)
  if (method?.createdBy === reviewerId) throw problem(403, 'four-eyes', 'You registered the method version in force for this acquisition; under the lab\'s four-eyes rule another reviewer must release it.')
}

/** The version of the same acquisition partners were shown before `res` (released or retracted), if any. */
async function publishedBefore(tx: Queryable, res: { acquisitionId: string, version: number }) {
  const [previous] = await tx.select({ id: results.id, version: results.version }).from(results)
    .where(and(eq(results.acquisitionId, res.acquisitionId), lt(results.version, res.version), inArray(results.reviewState, ['released', 'retracted'])))
    .orderBy(desc(results.version)).limit(1)
  return previous
}

async function reviewerName(tx: Queryable, id: string | null) {
  if (!id) return null
  const [row] = await tx.select({ name: users.name }).from(users).where(eq(users.id, id))
  return row?.name ?? null
}

/**
 * Releases a held result and records what partners receive, in the caller's transaction
 * (`db` may be one) or in its own: `result.released` on an acquisition's first release,
 * `result.corrected` when an earlier version of the same acquisition was already released
 * (naming it and this version's correction reason). The caller kicks the delivery worker
 * after its commit (this function kicks it too, which is harmless before a commit).
 */
export async function releaseResult(db: Queryable, audit: AuditContext, resultId: string, opts: ReleaseOptions = {}) {
  const outcome = await db.transaction(async (tx) => {
    await lockAcquisitionOf(tx, resultId)
    const row = await lockResult(tx, resultId, opts.labId)
    if (row.res.reviewState !== 'held') throw problem(409, 'not-held', `This result is ${row.res.reviewState}; only a held result can be released.`)
    if (row.res.supersededBy) {
      // Reprocessing wrote a newer version (under the calibration now in force): this one may be released only if that was rejected.
      const [next] = await tx.select({ version: results.version, reviewState: results.reviewState }).from(results).where(eq(results.id, row.res.supersededBy))
      if (next && next.reviewState !== 'rejected') throw problem(409, 'superseded', `Version ${next.version} of this acquisition replaces this one (${next.reviewState}); release or reject that version instead.`)
    }
    const reviewerId = opts.automatic ? null : audit.actor.id
    await checkFourEyes(tx, row, reviewerId)
    const [later] = await tx.select({ version: results.version }).from(results)
      .where(and(eq(results.acquisitionId, row.res.acquisitionId), gt(results.version, row.res.version), inArray(results.reviewState, ['released', 'retracted']))).limit(1)
    if (later) throw problem(409, 'superseded', `Version ${later.version} of this acquisition is already released; an older version cannot be released over it.`)
    const previous = await publishedBefore(tx, row.res)
    const now = new Date()
    const [res] = await tx.update(results).set({ reviewState: 'released', reviewedBy: reviewerId, reviewedAt: now, reviewComment: opts.comment ?? null, releasedAt: now })
      .where(eq(results.id, resultId)).returning()
    // Partners are told of the version they were shown before, not of a held or rejected one in between.
    const view = resultView(row.acq, res!, row.slug, await reviewerName(tx, reviewerId), previous?.id ?? null)
    const type = previous ? RESULT_CORRECTED : RESULT_RELEASED
    const correction = previous ? { previousResultId: previous.id, previousVersion: previous.version, reason: res!.correctionReason } : undefined
    // result-event v1 describes the released result only (as result.created was): a correction goes to endpoints on v2 or later.
    await recordLabEvent(tx, res!.labId, type, correction ? { ...view, correction } : view, correction ? 2 : 1)
    await recordAudit(tx, {
      ...audit, action: type, targetType: 'result', targetId: resultId,
      detail: { labId: res!.labId, acquisitionId: res!.acquisitionId, runId: row.acq.externalId, version: res!.version, comment: opts.comment ?? null, automatic: !!opts.automatic, ...(correction ?? {}) },
    })
    return { resultId, acquisitionId: res!.acquisitionId, event: type, review: view.result.review }
  })
  kickDeliveries()
  return outcome
}

/** Releases several held results of a lab at once: all or none (the first refusal names its index). */
export async function releaseResults(audit: AuditContext, labId: string, resultIds: string[], comment?: string) {
  const released = await useDb().transaction(async (tx) => {
    const done = []
    for (const [i, id] of resultIds.entries()) {
      try { done.push(await releaseResult(tx, audit, id, { labId, comment })) }
      catch (error) {
        // The refusal names the result by its place in the request; nothing of the batch is released.
        if (isError(error)) throw fieldProblem(`resultIds.${i}`, error.message, error.statusCode === 404 ? 422 : error.statusCode, 'release-refused')
        throw error
      }
    }
    return done
  })
  kickDeliveries()
  return { released: released.length, items: released }
}

/** A reviewer refuses a held result (the comment says why); it never reaches partners and stays in the console. */
export async function rejectResult(audit: AuditContext, labId: string, resultId: string, comment: string) {
  return useDb().transaction(async (tx) => {
    const row = await lockResult(tx, resultId, labId)
    if (row.res.reviewState !== 'held') throw problem(409, 'not-held', `This result is ${row.res.reviewState}; only a held result can be rejected.`)
    const [res] = await tx.update(results).set({ reviewState: 'rejected', reviewedBy: audit.actor.id, reviewedAt: new Date(), reviewComment: comment })
      .where(eq(results.id, resultId)).returning()
    await recordAudit(tx, { ...audit, action: 'result.rejected', targetType: 'result', targetId: resultId, detail: { labId, acquisitionId: res!.acquisitionId, runId: row.acq.externalId, version: res!.version, comment } })
    return { resultId, acquisitionId: res!.acquisitionId, review: reviewOf(res!, await reviewerName(tx, audit.actor.id)) }
  })
}

/**
 * Withdraws a released result with a reason. It stays readable, to partners too, marked
 * retracted; partners receive `result.retracted`.
 */
export async function retractResult(audit: AuditContext, labId: string, resultId: string, reason: string) {
  const outcome = await useDb().transaction(async (tx) => {
    await lockAcquisitionOf(tx, resultId)
    const row = await lockResult(tx, resultId, labId)
    if (row.res.reviewState !== 'released') throw problem(409, 'not-released', `This result is ${row.res.reviewState}; only a released result can be retracted.`)
    const now = new Date()
    const [res] = await tx.update(results).set({ reviewState: 'retracted', retractedBy: audit.actor.id, retractedAt: now, retractionReason: reason })
      .where(eq(results.id, resultId)).returning()
    const previous = await publishedBefore(tx, res!)
    const review = reviewOf(res!, await reviewerName(tx, res!.reviewedBy), previous?.id ?? null)
    await recordLabEvent(tx, labId, RESULT_RETRACTED, {
      kind: 'retraction', resultId, id: res!.acquisitionId, runId: row.acq.externalId, instrument: row.slug, version: res!.version,
      reason, retractedAt: now.toISOString(), review,
    }, 2) // result-event v1 does not describe a retraction: endpoints on v2 or later only.
    await recordAudit(tx, { ...audit, action: 'result.retracted', targetType: 'result', targetId: resultId, detail: { labId, acquisitionId: res!.acquisitionId, runId: row.acq.externalId, version: res!.version, reason } })
    return { resultId, acquisitionId: res!.acquisitionId, review }
  })
  kickDeliveries()
  return outcome
}

function encodeCursor(at: Date, id: string) {
  return Buffer.from(`${at.toISOString()}|${id}`).toString('base64url')
}
function decodeCursor(cursor: string) {
  const [at, id] = Buffer.from(cursor, 'base64url').toString().split('|')
  if (!id || !at || Number.isNaN(Date.parse(at)) || !/^[0-9a-f-]{36}$/.test(id)) throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
  return { at, id }
}

/**
 * Held versions a reviewer can still release: not those a newer version (held or released)
 * replaces; one whose replacement was rejected comes back.
 */
const awaitingReview = () => and(eq(results.reviewState, 'held'),
  sql`not exists (select 1 from ${results} n where n.id = ${results.supersededBy} and n.review_state <> 'rejected')`)

/** The lab's held results, oldest first (the queue a reviewer works through), in cursor pages. */
export async function heldResults(labId: string, limit: number, cursor?: string) {
  const after = cursor ? decodeCursor(cursor) : null
  const rows = await useDb().select({
    resultId: results.id, acquisitionId: acquisitions.id, runId: acquisitions.externalId, instrument: instruments.slug,
    acquiredAt: acquisitions.acquiredAt, sampleRef: acquisitions.sampleRef, version: results.version, correctionReason: results.correctionReason,
    qc: sql<string[]>`coalesce((select array_agg(distinct f->>'code') from jsonb_array_elements(${results.summary}->'qc') f), '{}')`,
    submittedBy: submitter.name, createdAt: results.createdAt,
  }).from(results)
    .innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .leftJoin(submitter, eq(submitter.id, acquisitions.submittedBy))
    .where(and(eq(results.labId, labId), awaitingReview(),
      after ? sql`(${results.createdAt}, ${results.id}) > (${after.at}::timestamptz, ${after.id}::uuid)` : undefined))
    .orderBy(asc(results.createdAt), asc(results.id)).limit(limit + 1)
  const items = rows.slice(0, limit)
  const [{ total } = { total: 0 }] = await useDb().select({ total: sql<number>`count(*)::int` }).from(results).where(and(eq(results.labId, labId), awaitingReview()))
  return {
    total,
    items: items.map(r => ({ ...r, acquiredAt: r.acquiredAt.toISOString(), createdAt: r.createdAt.toISOString() })),
    nextCursor: rows.length > limit ? encodeCursor(items.at(-1)!.createdAt, items.at(-1)!.resultId) : null,
  }
}
