import { z } from 'zod'
import { methodDefinition } from './methods'
import { methodView, workingStandardView } from './sequences'
import { reviewStates } from './lifecycle'

// What the console's isotope routes answer (sequences, control charts, methods, standards and
// reference materials), as the browser sees them: dates arrive as ISO strings. The console's
// view types are inferred from these schemas, never written out by hand.

const measured = z.object({ value: z.number(), u: z.number() })
const flag = z.object({ code: z.string(), message: z.string(), position: z.number().int().optional() })
const role = z.enum(['sample', 'working-standard', 'reference-gas', 'blank', 'monitoring-standard'])
const isoDate = z.string()

export const sequenceStatus = z.enum(['open', 'closed', 'processed', 'failed'])

/** One line of a lab's sequence list. */
export const sequenceListItem = z.object({
  id: z.string(),
  externalId: z.string(),
  instrument: z.object({ id: z.string(), slug: z.string(), name: z.string() }),
  gas: z.string().nullable(),
  status: sequenceStatus,
  methodVersion: z.number().int().nullable(),
  items: z.number().int(),
  samples: z.number().int(),
  startedAt: isoDate.nullable(),
  closedAt: isoDate.nullable(),
  /** False when an acceptance rule of the method failed (not to be released); null before processing. */
  accepted: z.boolean().nullable(),
  /** Where the outcome stands in the lab's review (partners receive it once released). */
  reviewState: z.enum(reviewStates),
  flags: z.array(flag),
  violations: z.number().int().describe('control-chart rule violations this sequence raised'),
})
export const sequenceListPage = z.object({ items: z.array(sequenceListItem), nextCursor: z.string().nullable() })

const scaledValue = measured.extend({ scale: z.string(), k: z.number() })

/** An acquisition of the sequence, in order, with what the method made of it. */
export const sequenceItemView = z.object({
  position: z.number().int(),
  role,
  material: z.string().nullable(),
  materialName: z.string().nullable(),
  acquiredAt: isoDate,
  acquisitionId: z.string().nullable(),
  raw: z.record(z.string(), measured),
  final: z.record(z.string(), scaledValue),
  residual: z.record(z.string(), z.number()),
  flags: z.array(flag),
})

/** A standard measured in the sequence against its accepted value. */
export const standardComparison = z.object({
  material: z.string(),
  name: z.string(),
  quantity: z.string(),
  accepted: measured,
  source: z.string(),
  positions: z.array(z.number().int()),
  measured: measured.nullable().describe('mean of its final values in this sequence'),
  residual: z.number().nullable().describe('measured − accepted, in the quantity\'s unit'),
  anchor: z.boolean().describe('whether it anchors the normalisation (otherwise a check standard)'),
})

export const normalisationView = z.object({
  quantity: z.string(),
  scale: z.string(),
  slope: measured,
  intercept: measured,
  covariance: z.number(),
  rmsResidual: z.number(),
  anchors: z.array(z.object({ material: z.string(), name: z.string(), positions: z.array(z.number().int()), accepted: measured, measuredMean: measured, residual: z.number() })),
  /** The samples this line carried onto the scale: the anchors' reach in this sequence. */
  anchoredSamples: z.array(z.object({ position: z.number().int(), raw: measured, final: scaledValue })),
})

export const driftView = z.object({
  quantity: z.string(),
  model: z.enum(['none', 'linear-time', 'linear-position']),
  slope: measured,
  material: z.string(),
  /** The repeated standard's raw values along the sequence, which the fit runs through. */
  points: z.array(z.object({ position: z.number().int(), acquiredAt: isoDate, value: z.number() })),
})

export const sequenceDetail = sequenceListItem.extend({
  labId: z.string(),
  review: z.object({
    state: z.enum(reviewStates), releasedAt: isoDate.nullable(), reviewedBy: z.string().nullable(), comment: z.string().nullable(),
    retractionReason: z.string().nullable(), retractedAt: isoDate.nullable(),
  }),
  method: z.object({ version: z.number().int(), definition: methodDefinition }).nullable(),
  quantities: z.array(z.string()),
  failure: z.object({ code: z.string(), message: z.string(), field: z.string().optional() }).nullable(),
  rows: z.array(sequenceItemView),
  standards: z.array(standardComparison),
  normalisation: z.array(normalisationView),
  drift: z.array(driftView),
  steps: z.array(z.object({ step: z.string(), source: z.string(), parameters: z.record(z.string(), z.unknown()) })),
  violationList: z.array(z.object({ rule: z.string(), material: z.string(), quantity: z.string(), message: z.string() })),
})

/** One point of a control chart: a standard's value in one sequence. */
export const controlPoint = z.object({
  sequenceId: z.string(),
  externalId: z.string(),
  at: isoDate,
  value: z.number(),
  u: z.number(),
  /** (value − accepted) / s: the chart's own unit. */
  z: z.number(),
  cusumHigh: z.number(),
  cusumLow: z.number(),
})

export const controlViolation = z.object({
  rule: z.string(),
  sequenceId: z.string(),
  externalId: z.string(),
  at: isoDate,
  message: z.string(),
})

export const controlChartKey = z.object({
  instrument: z.object({ id: z.string(), slug: z.string(), name: z.string() }),
  material: z.string(),
  materialName: z.string(),
  quantity: z.string(),
  points: z.number().int(),
  violations: z.number().int(),
  lastAt: isoDate.nullable(),
})
export const controlChartList = z.object({ items: z.array(controlChartKey) })

export const controlChartView = controlChartKey.extend({
  accepted: measured,
  acceptedSource: z.string(),
  sd: z.number().describe('the chart\'s s: the spread the ±2s and ±3s lines are drawn at'),
  sdSource: z.string(),
  cusum: z.object({ k: z.number(), h: z.number(), source: z.string() }),
  rulesSource: z.string(),
  series: z.array(controlPoint),
  violationList: z.array(controlViolation),
})

// Methods and working standards answer in the sequences API's own shapes (MethodView and
// WorkingStandardView in shared/schemas/sequences.ts).

/** What needs a lab manager's eye today: rule violations and sequences that did not pass. */
export const isotopeAttention = z.object({
  violations: z.array(controlViolation.extend({ labId: z.string(), lab: z.string(), instrumentId: z.string(), material: z.string(), quantity: z.string() })),
  failedSequences: z.array(z.object({ id: z.string(), labId: z.string(), lab: z.string(), externalId: z.string(), status: sequenceStatus, closedAt: isoDate.nullable(), flags: z.array(flag) })),
})

export const referenceMaterialView = z.object({
  id: z.string(),
  name: z.string(),
  values: z.record(z.string(), measured.extend({ scale: z.string().optional() })),
  source: z.string(),
  fromMemory: z.boolean(),
})
export const referenceMaterialList = z.object({ items: z.array(referenceMaterialView) })

export type SequenceListItem = z.infer<typeof sequenceListItem>
export type SequenceListPage = z.infer<typeof sequenceListPage>
export type SequenceDetail = z.infer<typeof sequenceDetail>
export type SequenceItemView = z.infer<typeof sequenceItemView>
export type NormalisationView = z.infer<typeof normalisationView>
export type DriftView = z.infer<typeof driftView>
export type StandardComparison = z.infer<typeof standardComparison>
export type ControlChartView = z.infer<typeof controlChartView>
export type ControlChartList = z.infer<typeof controlChartList>
export type IsotopeAttention = z.infer<typeof isotopeAttention>
export type ReferenceMaterialView = z.infer<typeof referenceMaterialView>
export type ReferenceMaterialList = z.infer<typeof referenceMaterialList>

// What the console's isotope routes take (query strings and route parameters).
export const consoleSequenceListQuery = z.object({
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
  instrument: z.uuid({ error: 'must be an instrument id' }).optional(),
  status: sequenceStatus.optional(),
})
export const sequenceRouteParams = z.object({ id: z.uuid(), sequenceId: z.uuid({ error: 'must be a sequence id' }) })
export const controlChartQuery = z.object({
  material: z.string().trim().min(1, 'is required').max(64),
  quantity: z.string().trim().min(1, 'is required').max(16),
})
export const instrumentRouteParams = z.object({ id: z.uuid(), instrumentId: z.uuid({ error: 'must be an instrument id' }) })

/** Each instrument of a lab with its method versions (newest first) and the one in force now. */
export const instrumentMethodsList = z.object({
  items: z.array(z.object({ instrumentId: z.string(), instrument: z.string(), name: z.string(), current: methodView.nullable(), versions: z.array(methodView) })),
})
export type InstrumentMethodsList = z.infer<typeof instrumentMethodsList>
export const workingStandardList = z.object({ items: z.array(workingStandardView) })
export type WorkingStandardList = z.infer<typeof workingStandardList>
