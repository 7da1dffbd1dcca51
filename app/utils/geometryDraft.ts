import type { DetectorSpec } from '#shared/engine/detectors'
import type { Geometry, GeometryKind } from '#shared/engine/geometry'

type LengthDraft = { value: number | null, unit: string, u: number | null }
/** A collector's detector being typed in (undefined: none registered). */
export type DetectorDraft =
  | { type: 'faraday', resistor: LengthDraft, gain: { value: number | null, u: number | null, calibratedOn?: string } }
  | { type: 'ion-counter', deadTime: LengthDraft, model: 'non-paralysable' | 'paralysable' }
/** A geometry being typed in: numbers may still be empty. zod checks it before it is sent. */
export type GeometryDraft =
  | { kind: 'potential-sector', analyzerRadius: LengthDraft, detector?: DetectorDraft }
  | { kind: 'wien-sector', analyzerRadius: LengthDraft, plateGap: LengthDraft, detector?: DetectorDraft }
  | { kind: 'multi-collector', collectors: { id: string, effectiveRadius: LengthDraft, detector?: DetectorDraft }[] }

// Uncertainties start empty, never 0: a zero the person did not type would claim an exact value
// (issue 21); the schema refuses an empty one, so 0 must be typed when it is meant.
export const emptyLength = (): LengthDraft => ({ value: null, unit: 'cm', u: null })

export function emptyDetector(type: DetectorDraft['type']): DetectorDraft {
  if (type === 'faraday') return { type, resistor: { value: null, unit: 'GΩ', u: null }, gain: { value: 1, u: null } }
  return { type, deadTime: { value: null, unit: 'ns', u: null }, model: 'non-paralysable' }
}

export function emptyGeometry(kind: GeometryKind): GeometryDraft {
  if (kind === 'wien-sector') return { kind, analyzerRadius: emptyLength(), plateGap: { value: null, unit: 'mm', u: null } }
  if (kind === 'multi-collector') return { kind, collectors: [{ id: 'L1', effectiveRadius: emptyLength() }, { id: 'C', effectiveRadius: emptyLength() }, { id: 'H1', effectiveRadius: emptyLength() }] }
  return { kind, analyzerRadius: emptyLength() }
}

/** A registered geometry as a draft, to start a new version from the one in force. */
export function draftOf(g: Geometry): GeometryDraft {
  return JSON.parse(JSON.stringify(g)) as GeometryDraft
}

type Measured = { value: number, unit: string, u: number }
const m = (x: Measured) => `${x.value}${x.u ? ` ± ${x.u}` : ''} ${x.unit}`

/** A registered detector in words. */
export function describeDetector(d: DetectorSpec | undefined): string {
  if (!d) return ''
  if (d.type === 'faraday') return ` (Faraday, R ${m(d.resistor)}${d.gain.value !== 1 || d.gain.u ? `, gain ${d.gain.value}${d.gain.u ? ` ± ${d.gain.u}` : ''}${d.gain.calibratedOn ? ` of ${d.gain.calibratedOn}` : ''}` : ''})`
  return ` (ion counter, τ ${m(d.deadTime)}, ${d.model})`
}

/** A geometry in words: what a history row shows. */
export function describeGeometry(g: Geometry): string {
  if (g.kind === 'potential-sector') return `analyzer radius ${m(g.analyzerRadius)}${describeDetector(g.detector)}`
  if (g.kind === 'wien-sector') return `analyzer radius ${m(g.analyzerRadius)}, plate gap ${m(g.plateGap)}${describeDetector(g.detector)}`
  return g.collectors.map(c => `${c.id}: ${m(c.effectiveRadius)}${describeDetector(c.detector)}`).join(', ')
}
