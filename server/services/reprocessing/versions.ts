import { and, asc, eq } from 'drizzle-orm'
import type { EngineResult } from '#shared/engine'
import { acquisitions, reprocessJobs, results } from '../../database/schema'
import { figuresDiff } from './compare'

// An acquisition's result versions (lineage) and what changed between two of them.

async function versionsOf(labId: string, acquisitionId: string) {
  const acq = await useDb().query.acquisitions.findFirst({ where: and(eq(acquisitions.id, acquisitionId), eq(acquisitions.labId, labId)), columns: { id: true } })
  if (!acq) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  return useDb().select({ res: results, jobReason: reprocessJobs.reason }).from(results)
    .leftJoin(reprocessJobs, eq(reprocessJobs.id, results.reprocessJobId))
    .where(eq(results.acquisitionId, acquisitionId)).orderBy(asc(results.version))
}

/** Every version of an acquisition's result, oldest first, with its lineage and review state; `published` marks what partners see. */
export async function resultVersions(labId: string, acquisitionId: string) {
  const rows = await versionsOf(labId, acquisitionId)
  const published = rows.filter(r => r.res.reviewState === 'released' || r.res.reviewState === 'retracted').at(-1)?.res.id ?? null
  return {
    items: rows.map(({ res }) => {
      const summary = res.summary as unknown as { geometryVersion: number, calibrationVersion: number | null }
      return {
        id: res.id, version: res.version, supersedes: res.supersedes, supersededBy: res.supersededBy, reviewState: res.reviewState,
        correctionReason: res.correctionReason, reprocessJobId: res.reprocessJobId, releasedAt: res.releasedAt?.toISOString() ?? null,
        published: res.id === published, createdAt: res.createdAt.toISOString(),
        versions: { engine: res.engineVersion, geometry: summary.geometryVersion, calibration: summary.calibrationVersion },
      }
    }),
  }
}

/**
 * Two versions side by side (m/z, areas, ratios, δ, flags). Omitted, `to` is the newest
 * version and `from` the one it supersedes.
 */
export async function resultDiff(labId: string, acquisitionId: string, query: { from?: number, to?: number }) {
  const rows = await versionsOf(labId, acquisitionId)
  const to = query.to ? rows.find(r => r.res.version === query.to) : rows.at(-1)
  if (!to) throw fieldProblem('to', 'this acquisition has no result of this version', 404, 'result-version-not-found')
  const from = query.from ? rows.find(r => r.res.version === query.from) : rows.find(r => r.res.id === to.res.supersedes) ?? rows.at(-2)
  if (!from) throw fieldProblem('from', query.from ? 'this acquisition has no result of this version' : 'this acquisition has one version only', 404, 'result-version-not-found')
  const side = (r: typeof rows[number]) => {
    const summary = r.res.summary as unknown as EngineResult & { geometryVersion: number, calibrationVersion: number | null }
    return {
      id: r.res.id, version: r.res.version, reviewState: r.res.reviewState, correctionReason: r.res.correctionReason,
      versions: { engine: r.res.engineVersion, geometry: summary.geometryVersion, calibration: summary.calibrationVersion },
    }
  }
  return {
    acquisitionId,
    from: side(from),
    to: side(to),
    ...figuresDiff(from.res.summary as unknown as EngineResult, to.res.summary as unknown as EngineResult),
  }
}
