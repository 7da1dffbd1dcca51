import type { Geometry, GeometryKind } from '#shared/engine/geometry'

type LengthDraft = { value: number | null, unit: string, u: number | null }
/** A geometry being typed in: numbers may still be empty. zod checks it before it is sent. */
export type GeometryDraft =
  | { kind: 'potential-sector', analyzerRadius: LengthDraft }
  | { kind: 'wien-sector', analyzerRadius: LengthDraft, plateGap: LengthDraft }
  | { kind: 'multi-collector', collectors: { id: string, effectiveRadius: LengthDraft }[] }

export const emptyLength = (): LengthDraft => ({ value: null, unit: 'cm', u: 0 })

export function emptyGeometry(kind: GeometryKind): GeometryDraft {
  if (kind === 'wien-sector') return { kind, analyzerRadius: emptyLength(), plateGap: { value: null, unit: 'mm', u: 0 } }
  if (kind === 'multi-collector') return { kind, collectors: [{ id: 'L1', effectiveRadius: emptyLength() }, { id: 'C', effectiveRadius: emptyLength() }, { id: 'H1', effectiveRadius: emptyLength() }] }
  return { kind, analyzerRadius: emptyLength() }
}

/** A registered geometry as a draft, to start a new version from the one in force. */
export function draftOf(g: Geometry): GeometryDraft {
  return JSON.parse(JSON.stringify(g)) as GeometryDraft
}

/** A geometry in words: what a history row shows. */
export function describeGeometry(g: Geometry): string {
  const m = (x: { value: number, unit: string, u: number }) => `${x.value}${x.u ? ` ± ${x.u}` : ''} ${x.unit}`
  if (g.kind === 'potential-sector') return `analyzer radius ${m(g.analyzerRadius)}`
  if (g.kind === 'wien-sector') return `analyzer radius ${m(g.analyzerRadius)}, plate gap ${m(g.plateGap)}`
  return g.collectors.map(c => `${c.id}: ${m(c.effectiveRadius)}`).join(', ')
}
