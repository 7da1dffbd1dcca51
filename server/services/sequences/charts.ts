import { and, asc, count, desc, eq, max, sql } from 'drizzle-orm'
import { CUSUM_SOURCE, WESTGARD_SOURCE, evaluateControlRules, runCusum, type ControlPoint } from '#shared/engine/isotopes/controlCharts'
import { controlPoints, instruments } from '../../database/schema'

// Control charts per instrument × material × quantity: each standard measured in a processed
// sequence adds a point (measured against accepted value); the multi-rules (Westgard et al.,
// 1981) and a tabular CUSUM run over the chart's recent history, and any rule a new point
// completes is recorded on it and flags its sequence.

export type NewControlPoint = Omit<typeof controlPoints.$inferInsert, 'id' | 'violations' | 'createdAt'> & { at: Date, position: number }
type PointRow = typeof controlPoints.$inferSelect

/** How many past points a new point is judged with: more than the longest rule (10x) and a CUSUM run needs. */
const HISTORY = 200
/**
 * Points before the chart's own s is used: until then the points' stated uncertainties stand in
 * for it (20 control measurements to establish a chart: common practice, no source).
 */
const MIN_POINTS_FOR_SD = 20

/** The s a chart is drawn with: the history's spread about the accepted values, or the stated u. */
export function chartSd(history: Pick<PointRow, 'value' | 'accepted' | 'u'>[], fresh: Pick<PointRow, 'u'>[] = []): { sd: number, basis: 'history' | 'stated-u' } {
  if (history.length >= MIN_POINTS_FOR_SD) {
    const d = history.map(p => p.value - p.accepted)
    const mean = d.reduce((a, b) => a + b, 0) / d.length
    const sd = Math.sqrt(d.reduce((a, b) => a + (b - mean) ** 2, 0) / (d.length - 1))
    if (sd > 0) return { sd, basis: 'history' }
  }
  const all = [...history, ...fresh]
  return { sd: Math.sqrt(all.reduce((a, p) => a + p.u ** 2, 0) / Math.max(1, all.length)), basis: 'stated-u' }
}

/** The rules each point of `series` completes (Westgard multi-rules and CUSUM), by index. */
function violationsByIndex(series: Pick<PointRow, 'at' | 'value' | 'accepted'>[], sd: number): Map<number, Set<string>> {
  const out = new Map<number, Set<string>>()
  if (!(sd > 0)) return out
  // Deviations from each point's own accepted value: a recalibrated standard keeps one chart.
  const points: ControlPoint[] = series.map(p => ({ at: p.at.getTime(), value: p.value - p.accepted }))
  const mark = (i: number, rule: string) => { const s = out.get(i) ?? new Set<string>(); s.add(rule); out.set(i, s) }
  for (const v of evaluateControlRules(points, { accepted: 0, sd })) mark(v.points.at(-1)!, v.rule)
  for (const s of runCusum(points, { accepted: 0, sd }).signals) mark(s.point, s.rule)
  return out
}

/**
 * Appends a sequence's standards to their charts (in the caller's transaction) with the rules
 * each new point completes.
 */
export async function appendControlPoints(tx: Queryable, fresh: NewControlPoint[]): Promise<PointRow[]> {
  const groups = new Map<string, NewControlPoint[]>()
  for (const p of fresh) {
    const key = `${p.instrumentId}|${p.material}|${p.quantity}`
    groups.set(key, [...groups.get(key) ?? [], p])
  }
  const stored: PointRow[] = []
  for (const group of groups.values()) {
    const { instrumentId, material, quantity } = group[0]!
    // One chart is extended by one sequence at a time, so rules see every earlier point.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${`chart:${instrumentId}:${material}:${quantity}`}))`)
    const history = (await tx.select().from(controlPoints)
      .where(and(eq(controlPoints.instrumentId, instrumentId), eq(controlPoints.material, material), eq(controlPoints.quantity, quantity)))
      .orderBy(desc(controlPoints.at), desc(controlPoints.id)).limit(HISTORY)).reverse()
    const sorted = [...group].sort((a, b) => a.at.getTime() - b.at.getTime())
    const { sd } = chartSd(history, sorted)
    const found = violationsByIndex([...history, ...sorted], sd)
    const rows = await tx.insert(controlPoints).values(sorted.map((p, j) => ({ ...p, violations: [...found.get(history.length + j) ?? []] }))).returning()
    stored.push(...rows)
  }
  return stored
}

/** One chart: its points in time order with their violations, the s it is drawn with, and the CUSUM trace. */
export async function controlChart(labId: string, instrumentId: string, material: string, quantity: string, limit = 500) {
  const rows = (await useDb().select().from(controlPoints)
    .where(and(eq(controlPoints.labId, labId), eq(controlPoints.instrumentId, instrumentId), eq(controlPoints.material, material), eq(controlPoints.quantity, quantity)))
    .orderBy(desc(controlPoints.at), desc(controlPoints.id)).limit(limit)).reverse()
  const { sd, basis } = chartSd(rows)
  const trace = sd > 0 && rows.length ? runCusum(rows.map(p => ({ at: p.at.getTime(), value: p.value - p.accepted })), { accepted: 0, sd }).trace : []
  return {
    instrumentId, material, quantity, sd, sdBasis: basis,
    sources: { rules: WESTGARD_SOURCE, cusum: CUSUM_SOURCE },
    points: rows.map((p, i) => ({
      at: p.at.toISOString(), value: p.value, accepted: p.accepted, u: p.u, sequenceId: p.sequenceId, position: p.position, violations: p.violations,
      cusumUpper: trace[i]?.upper ?? null, cusumLower: trace[i]?.lower ?? null,
    })),
  }
}

/** Every chart of a lab: instrument × material × quantity with its size, last point and violations. */
export function listControlCharts(labId: string) {
  return useDb().select({
    instrumentId: controlPoints.instrumentId, instrument: instruments.slug, material: controlPoints.material, quantity: controlPoints.quantity,
    points: count(), lastAt: max(controlPoints.at),
    violations: sql<number>`count(*) filter (where cardinality(${controlPoints.violations}) > 0)::int`,
  }).from(controlPoints).innerJoin(instruments, eq(instruments.id, controlPoints.instrumentId))
    .where(eq(controlPoints.labId, labId))
    .groupBy(controlPoints.instrumentId, instruments.slug, controlPoints.material, controlPoints.quantity)
    .orderBy(asc(instruments.slug), asc(controlPoints.material), asc(controlPoints.quantity))
}

/** The lab's control-chart violations, newest first (for the overview). */
export function recentViolations(labId: string, limit = 20) {
  return useDb().select({
    instrument: instruments.slug, material: controlPoints.material, quantity: controlPoints.quantity, at: controlPoints.at,
    value: controlPoints.value, accepted: controlPoints.accepted, sequenceId: controlPoints.sequenceId, position: controlPoints.position, violations: controlPoints.violations,
  }).from(controlPoints).innerJoin(instruments, eq(instruments.id, controlPoints.instrumentId))
    .where(and(eq(controlPoints.labId, labId), sql`cardinality(${controlPoints.violations}) > 0`))
    .orderBy(desc(controlPoints.at)).limit(limit)
}
