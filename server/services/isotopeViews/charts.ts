import { and, desc, eq, gte, inArray, sql } from 'drizzle-orm'
import type { ControlChartList, ControlChartView, IsotopeAttention } from '#shared/schemas/isotopeViews'
import { controlPoints, instruments, labs, sequences } from '../../database/schema'
import { controlChart, listControlCharts } from '../sequences'
import { sequenceMaterialsAt } from './materials'

// Control charts as the console draws them: the sequences service's chart (points, the s it is
// drawn with, the CUSUM trace and the rules each point broke) with names a person reads, and
// the lab's rule violations and failed sequences for the overview.

/** What each rule means, in the words the chart's list uses (Westgard et al. 1981; Page 1954). */
const ruleMeaning = new Map<string, string>([
  ['1-3s', 'one point beyond ±3s'],
  ['2-2s', 'two consecutive points beyond 2s on the same side'],
  ['R-4s', 'two consecutive points on opposite sides beyond 2s (a range over 4s)'],
  ['4-1s', 'four consecutive points beyond 1s on the same side'],
  ['10x', 'ten consecutive points on the same side of the accepted value'],
  ['cusum-upper', 'the upper CUSUM passed its decision interval: a slow upward drift'],
  ['cusum-lower', 'the lower CUSUM passed its decision interval: a slow downward drift'],
])
const meaning = (rule: string) => ruleMeaning.get(rule) ?? rule

async function externalIds(ids: string[]) {
  if (!ids.length) return new Map<string, string>()
  const rows = await useDb().select({ id: sequences.id, externalId: sequences.externalId }).from(sequences).where(inArray(sequences.id, ids))
  return new Map(rows.map(r => [r.id, r.externalId]))
}

/** The lab's charts (instrument × material × quantity) with their size, last point and violations. */
export async function listControlChartViews(labId: string): Promise<ControlChartList> {
  const rows = await listControlCharts(labId)
  const insts = await useDb().select({ id: instruments.id, slug: instruments.slug, name: instruments.name }).from(instruments).where(eq(instruments.labId, labId))
  const byId = new Map(insts.map(i => [i.id, i]))
  const names = await sequenceMaterialsAt(labId, [...new Set(rows.map(r => r.material))], new Date())
  return {
    items: rows.map(r => ({
      instrument: byId.get(r.instrumentId) ?? { id: r.instrumentId, slug: r.instrument, name: r.instrument },
      material: r.material, materialName: names.get(r.material)?.name ?? r.material, quantity: r.quantity,
      points: r.points, violations: r.violations, lastAt: r.lastAt ? new Date(r.lastAt).toISOString() : null,
    })),
  }
}

/** One chart of the lab; an instrument of another lab, or a chart with no points, is 404. */
export async function getControlChartView(labId: string, instrumentId: string, material: string, quantity: string): Promise<ControlChartView> {
  const inst = await useDb().query.instruments.findFirst({ where: and(eq(instruments.id, instrumentId), eq(instruments.labId, labId)), columns: { id: true, slug: true, name: true } })
  if (!inst) throw problem(404, 'instrument-not-found', 'No such instrument in this lab.')
  const chart = await controlChart(labId, instrumentId, material, quantity)
  if (!chart.points.length) throw problem(404, 'chart-not-found', 'No control-chart points for this material and quantity on this instrument.')
  const info = (await sequenceMaterialsAt(labId, [material], new Date())).get(material)
  const last = chart.points.at(-1)!
  const ids = await externalIds([...new Set(chart.points.map(p => p.sequenceId).filter((s): s is string => !!s))])
  const series = chart.points.map(p => ({
    sequenceId: p.sequenceId ?? '', externalId: p.sequenceId ? ids.get(p.sequenceId) ?? '' : '', at: p.at,
    // A recalibrated standard keeps one chart: each point is drawn against the latest accepted value.
    value: p.value - p.accepted + last.accepted, u: p.u,
    z: chart.sd > 0 ? (p.value - p.accepted) / chart.sd : 0,
    cusumHigh: p.cusumUpper ?? 0, cusumLow: p.cusumLower ?? 0,
  }))
  const violationList = chart.points.flatMap((p, i) => p.violations.map(rule => ({
    rule, sequenceId: p.sequenceId ?? '', externalId: series[i]!.externalId, at: p.at,
    message: `${meaning(rule)}: ${p.value.toFixed(3)} against the accepted ${p.accepted.toFixed(3)} (${series[i]!.z >= 0 ? '+' : '−'}${Math.abs(series[i]!.z).toFixed(2)}s)`,
  })))
  return {
    instrument: inst, material, materialName: info?.name ?? material, quantity,
    points: series.length, violations: violationList.length, lastAt: last.at,
    accepted: { value: last.accepted, u: info?.values[quantity]?.u ?? 0 },
    acceptedSource: info?.source ?? 'the accepted value recorded with each point',
    sd: chart.sd,
    sdSource: chart.sdBasis === 'history' ? `the chart's own spread about the accepted value over its ${series.length} points` : 'the points\' stated uncertainties (fewer than 20 points so far)',
    cusum: { k: 0.5, h: 5, source: chart.sources.cusum },
    rulesSource: chart.sources.rules,
    series,
    violationList,
  }
}

/**
 * What needs a lab manager's eye: rule violations of the last 90 days and sequences that failed
 * or did not pass their method's acceptance rules, for one lab or every lab the user may read.
 */
export async function isotopeAttentionFor(labIds: string[] | null): Promise<IsotopeAttention> {
  const db = useDb()
  const since = new Date(Date.now() - 90 * 86_400_000)
  const scope = labIds ? inArray(controlPoints.labId, labIds.length ? labIds : ['00000000-0000-0000-0000-000000000000']) : undefined
  const points = await db.select({ p: controlPoints, lab: labs.name, externalId: sequences.externalId })
    .from(controlPoints).innerJoin(labs, eq(labs.id, controlPoints.labId)).leftJoin(sequences, eq(sequences.id, controlPoints.sequenceId))
    .where(and(scope, sql`cardinality(${controlPoints.violations}) > 0`, gte(controlPoints.at, since)))
    .orderBy(desc(controlPoints.at)).limit(20)
  const seqScope = labIds ? inArray(sequences.labId, labIds.length ? labIds : ['00000000-0000-0000-0000-000000000000']) : undefined
  const failed = await db.select({ s: sequences, lab: labs.name }).from(sequences).innerJoin(labs, eq(labs.id, sequences.labId))
    .where(and(seqScope, gte(sequences.createdAt, since), sql`(${sequences.status} = 'failed' or (${sequences.outcome}->>'accepted') = 'false')`))
    .orderBy(desc(sequences.createdAt)).limit(20)
  return {
    violations: points.flatMap(({ p, lab, externalId }) => p.violations.map(rule => ({
      rule, labId: p.labId, lab, instrumentId: p.instrumentId, material: p.material, quantity: p.quantity,
      sequenceId: p.sequenceId ?? '', externalId: externalId ?? '', at: p.at.toISOString(),
      message: `${meaning(rule)}: ${p.material} ${p.quantity} ${p.value.toFixed(3)} against ${p.accepted.toFixed(3)}`,
    }))),
    failedSequences: failed.map(({ s, lab }) => ({
      id: s.id, labId: s.labId, lab, externalId: s.externalId, status: s.status, closedAt: s.closedAt?.toISOString() ?? null,
      flags: s.failure ? [{ code: s.failure.code, message: s.failure.message }] : (s.outcome?.flags ?? []),
    })),
  }
}
