import { and, eq } from 'drizzle-orm'
import { results } from '../../database/schema'
import { releaseResult } from '../review'

// Releasing a reprocessed version: the console's "release correction" on a job's page. It is
// the review capability's release (four eyes, the event partners receive: `result.corrected`
// naming the version it replaces and the job's reason, or `result.released` when no earlier
// version was ever released), refused first for a version reprocessing did not write, so the
// job page cannot release an ordinary held result by mistake.

export async function releaseCorrection(audit: AuditContext, labId: string, resultId: string, comment?: string) {
  const [row] = await useDb().select({ supersedes: results.supersedes, jobId: results.reprocessJobId }).from(results)
    .where(and(eq(results.id, resultId), eq(results.labId, labId)))
  if (!row) throw problem(404, 'result-not-found', 'No such result in this lab.')
  if (!row.supersedes || !row.jobId) throw problem(409, 'not-a-correction', 'This version was not written by reprocessing; release it from the review queue.')
  return releaseResult(useDb(), audit, resultId, { labId, comment })
}
