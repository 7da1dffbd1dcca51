import { and, desc, eq, inArray, lt, sql } from 'drizzle-orm'
import { acquisitions, instruments, labs, reprocessJobs, results, users } from '../../database/schema'
import { kickDeliveries, recordLabEvent } from '../delivery'
import { acquisitionHead, resultView } from '../results'

// Releasing a reprocessed version: the console's "release correction". Partners see an
// acquisition's published version, its highest version that is released or retracted; a
// version that supersedes a published one reaches them as `result.corrected`, naming the
// version it replaces and the job's reason.
//
// Kept apart from the review capability (server/services/review, written beside this one):
// at the merge this function gives way to its releaseResult, which does the same for every
// version; the event data and audit action are the same.

const CORRECTED = 'result.corrected'
const RELEASED = 'result.released'

/**
 * Releases held version `resultId` of a lab's result, a version that reprocessing wrote.
 * Refused (409) when it is not a held reprocessed version, when a later version is already
 * published, or when the lab's four-eyes rule names the releasing user (the job's creator or
 * the acquisition's uploader). The event, the review columns and the audit row commit together.
 */
export async function releaseCorrection(audit: AuditContext, labId: string, resultId: string, comment?: string) {
  const outcome = await useDb().transaction(async (tx) => {
    const [row] = await tx.select({ res: results, acq: acquisitionHead, slug: instruments.slug, fourEyes: labs.fourEyes, jobCreator: reprocessJobs.createdBy })
      .from(results)
      .innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
      .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
      .innerJoin(labs, eq(labs.id, results.labId))
      .leftJoin(reprocessJobs, eq(reprocessJobs.id, results.reprocessJobId))
      .where(and(eq(results.id, resultId), eq(results.labId, labId)))
      .for('update', { of: results })
    if (!row) throw problem(404, 'result-not-found', 'No such result in this lab.')
    const { res, acq } = row
    if (!res.supersedes || !res.reprocessJobId) throw problem(409, 'not-a-correction', 'This version was not written by reprocessing; release it from the review queue.')
    if (res.reviewState !== 'held') throw problem(409, 'not-held', `This version is ${res.reviewState}: only a held version can be released.`)
    if (row.fourEyes && audit.actor.id && (audit.actor.id === row.jobCreator || audit.actor.id === acq.submittedBy)) {
      throw problem(409, 'four-eyes', 'This lab releases results under the four-eyes rule: someone other than who started the reprocessing or uploaded the acquisition must release it.')
    }
    const later = await tx.select({ version: results.version }).from(results)
      .where(and(eq(results.acquisitionId, acq.id), inArray(results.reviewState, ['released', 'retracted']), sql`${results.version} > ${res.version}`)).limit(1)
    if (later.length) throw problem(409, 'newer-version-published', `Version ${later[0]!.version} of this result is already published.`)
    const [previous] = await tx.select({ id: results.id, version: results.version }).from(results)
      .where(and(eq(results.acquisitionId, acq.id), inArray(results.reviewState, ['released', 'retracted']), lt(results.version, res.version)))
      .orderBy(desc(results.version)).limit(1)
    const now = new Date()
    const [released] = await tx.update(results).set({ reviewState: 'released', reviewedBy: audit.actor.id, reviewedAt: now, reviewComment: comment ?? null, releasedAt: now })
      .where(eq(results.id, res.id)).returning()
    const reviewer = audit.actor.id ? await tx.query.users.findFirst({ where: eq(users.id, audit.actor.id), columns: { name: true } }) : undefined
    const view = resultView(acq, released!, row.slug)
    const review = {
      state: 'released' as const, releasedAt: now.toISOString(), reviewedBy: reviewer?.name ?? null, version: res.version,
      supersedes: res.supersedes, correctionReason: res.correctionReason, retractionReason: null,
    }
    const type = previous ? CORRECTED : RELEASED
    const data = previous
      ? { ...view, review, correction: { previousResultId: previous.id, previousVersion: previous.version, reason: res.correctionReason } }
      : { ...view, review }
    // result-event v1 does not describe lifecycle events: endpoints on v2 or later only.
    await recordLabEvent(tx, labId, type, data, 2)
    await recordAudit(tx, {
      ...audit, action: type, targetType: 'result', targetId: res.id,
      detail: { labId, acquisitionId: acq.id, version: res.version, previousResultId: previous?.id ?? null, previousVersion: previous?.version ?? null, reason: res.correctionReason, comment: comment ?? null, reprocessJobId: res.reprocessJobId },
    })
    return { event: type, resultId: res.id, version: res.version, previousResultId: previous?.id ?? null, previousVersion: previous?.version ?? null, review }
  })
  kickDeliveries()
  return outcome
}
