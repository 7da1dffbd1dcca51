import { z } from 'zod'
import { sequenceRoles, type SequenceRole } from '../engine/isotopes/types'
import { acquisitionInput } from './acquisitions'
import { slug } from './common'
import { releasePolicies, reviewStates } from './lifecycle'
import { methodDefinition } from './methods'

// Sequences as a lab system posts them (issue 19): a whole sequence at once, or one opened
// with a declared length and filled acquisition by acquisition; methods and working standards
// as a lab registers them. The answers' shapes are at the end.

/** The most acquisitions one sequence may hold. */
export const MAX_SEQUENCE_LENGTH = 2000

const finite = z.number({ error: 'must be a finite number' }).finite('must be a finite number')
const externalId = z.string({ error: 'is required' }).trim().min(1, 'is required').max(128, 'must be at most 128 characters')
const materialId = z.string().trim().min(1, 'is required').max(64, 'must be at most 64 characters')
const position = z.number({ error: 'must be a whole number from 1' }).int('must be a whole number from 1').min(1, 'must be a whole number from 1').max(MAX_SEQUENCE_LENGTH)

/** Roles that name the material measured (common practice, no source). */
export const standardRoles: readonly SequenceRole[] = ['working-standard', 'monitoring-standard']

/** One acquisition and its place in a sequence. */
export const sequenceMemberInput = z.object({
  position,
  role: z.enum(sequenceRoles as [SequenceRole, ...SequenceRole[]], { error: `must be one of ${sequenceRoles.join(', ')}` }),
  /** A reference material's id or one of the lab's working-standard codes. */
  material: materialId.optional(),
  acquisition: acquisitionInput,
}).strict().superRefine((v, ctx) => {
  if (standardRoles.includes(v.role) && !v.material) ctx.addIssue({ code: 'custom', path: ['material'], message: `a ${v.role} must name its material (a reference material or one of the lab's working standards)` })
  if (!standardRoles.includes(v.role) && v.material) ctx.addIssue({ code: 'custom', path: ['material'], message: `only working and monitoring standards name a material, not a ${v.role}` })
})
export type SequenceMemberInput = z.infer<typeof sequenceMemberInput>

/**
 * Opens a sequence. With `acquisitions` and no `length`, the sequence is whole: it closes and
 * is processed at once. With `length`, it closes when that many positions are filled (or when
 * the lab closes it).
 */
export const sequenceInput = z.object({
  instrument: slug,
  sequenceId: externalId,
  length: z.number({ error: 'must be a whole number' }).int('must be a whole number').min(1, 'must be at least 1').max(MAX_SEQUENCE_LENGTH, `must be at most ${MAX_SEQUENCE_LENGTH}`).optional(),
  /** Run under this method version rather than the one in force at the first acquisition. */
  methodVersion: z.number().int().min(1).optional(),
  acquisitions: z.array(sequenceMemberInput).max(MAX_SEQUENCE_LENGTH).default([]),
}).strict().superRefine((v, ctx) => {
  if (v.length === undefined && !v.acquisitions.length) ctx.addIssue({ code: 'custom', path: ['length'], message: 'give the declared length, or the acquisitions of the whole sequence' })
  if (v.length !== undefined && v.acquisitions.length > v.length) ctx.addIssue({ code: 'custom', path: ['acquisitions'], message: `holds ${v.acquisitions.length} acquisitions, more than the declared length ${v.length}` })
  const seen = new Map<number, number>()
  v.acquisitions.forEach((a, i) => {
    const before = seen.get(a.position)
    if (before !== undefined) ctx.addIssue({ code: 'custom', path: ['acquisitions', i, 'position'], message: `position ${a.position} is taken by acquisitions.${before}` })
    else seen.set(a.position, i)
    if (v.length !== undefined && a.position > v.length) ctx.addIssue({ code: 'custom', path: ['acquisitions', i, 'position'], message: `is past the declared length ${v.length}` })
    if (a.acquisition.instrument !== v.instrument) ctx.addIssue({ code: 'custom', path: ['acquisitions', i, 'acquisition', 'instrument'], message: `must be the sequence's instrument "${v.instrument}"` })
  })
})
export type SequenceInput = z.infer<typeof sequenceInput>

export const sequenceParams = z.object({ sequenceId: externalId })
export const instrumentParams = z.object({ slug })

/** A new version of an instrument's method. */
export const methodInput = z.object({
  name: z.string({ error: 'is required' }).trim().min(1, 'is required').max(120),
  validFrom: z.iso.datetime({ offset: true, error: 'must be an ISO 8601 date and time with an offset' }),
  definition: methodDefinition,
  note: z.string().trim().max(500).optional(),
  releasePolicy: z.enum(releasePolicies, { error: `must be one of ${releasePolicies.join(', ')}` }).optional()
    .describe('overrides the lab\'s release policy for sequences processed under this version; absent: the lab\'s'),
}).strict()
export type MethodInput = z.infer<typeof methodInput>

const measuredInput = z.object({ value: finite, u: finite.min(0, 'cannot be negative') }).strict()

/** A new version of a lab's working standard (a recalibration), valid from a date. */
export const workingStandardInput = z.object({
  code: z.string({ error: 'is required' }).trim().min(1, 'is required').max(64).regex(/^[\w.-]+$/, 'may hold letters, digits, ".", "_" and "-"'),
  name: z.string({ error: 'is required' }).trim().min(1, 'is required').max(120),
  /** Quantity ("δ13C") → value on its scale with its standard uncertainty. */
  values: z.record(z.string().min(1).max(16), measuredInput).refine(v => Object.keys(v).length > 0, 'give at least one value'),
  calibratedAgainst: z.array(materialId).min(1, 'name the reference materials it was calibrated against').max(10),
  validFrom: z.iso.datetime({ offset: true, error: 'must be an ISO 8601 date and time with an offset' }),
  validTo: z.iso.datetime({ offset: true }).optional(),
  note: z.string().trim().max(500).optional(),
}).strict().refine(v => !v.validTo || v.validTo > v.validFrom, { path: ['validTo'], message: 'must be after validFrom' })
export type WorkingStandardInput = z.infer<typeof workingStandardInput>

// ── Answers ──────────────────────────────────────────────────────────────────────────────

const measured = z.object({ value: z.number(), u: z.number() })
const scaled = measured.extend({ scale: z.string(), k: z.number() })
const flag = z.object({ code: z.string(), message: z.string(), position: z.number().int().optional() })

export const sequenceOutcomeView = z.object({
  gas: z.string(),
  quantities: z.array(z.string()),
  items: z.array(z.object({
    position: z.number().int(), role: z.string(), material: z.string().optional(),
    raw: z.record(z.string(), measured).describe('before normalisation: δ against the reference gas, or the measured ratio'),
    final: z.record(z.string(), scaled).describe('after every step of the method: on the international scale (or the corrected ratio), u the combined standard uncertainty, U = k·u'),
    residual: z.record(z.string(), z.number()).optional(),
    flags: z.array(flag),
  })),
  normalisation: z.array(z.object({
    quantity: z.string(), scale: z.string(), slope: measured, intercept: measured, covariance: z.number(), rmsResidual: z.number(),
    anchors: z.array(z.object({ material: z.string(), positions: z.array(z.number().int()), accepted: measured, measuredMean: measured, residual: z.number() })),
  })),
  drift: z.array(z.object({ quantity: z.string(), model: z.string(), slope: measured, material: z.string() })),
  steps: z.array(z.object({ step: z.string(), source: z.string(), parameters: z.record(z.string(), z.unknown()) })),
  flags: z.array(flag),
  accepted: z.boolean(),
})

export const sequenceView = z.object({
  id: z.uuid(),
  sequenceId: z.string().describe('the lab\'s own id'),
  instrument: z.string(),
  status: z.enum(['open', 'closed', 'processed', 'failed']),
  declaredLength: z.number().int().nullable(),
  received: z.number().int().describe('acquisitions in the sequence so far'),
  method: z.object({ id: z.uuid(), version: z.number().int(), name: z.string() }).nullable(),
  flagged: z.boolean().describe('a standard of this sequence broke a control-chart rule'),
  violations: z.array(z.object({ material: z.string(), quantity: z.string(), position: z.number().int().nullable(), rules: z.array(z.string()) })),
  failure: z.object({ code: z.string(), message: z.string(), field: z.string().optional() }).nullable(),
  acquisitions: z.array(z.object({ position: z.number().int(), role: z.string(), material: z.string().nullable(), acquisitionId: z.uuid(), runId: z.string(), acquiredAt: z.string() })),
  outcome: sequenceOutcomeView.nullable(),
  createdAt: z.string(), closedAt: z.string().nullable(), processedAt: z.string().nullable(),
  review: z.object({
    state: z.enum(reviewStates), releasedAt: z.string().nullable(), reviewedBy: z.string().nullable().describe('null: automatic, or not yet reviewed'),
    comment: z.string().nullable(), retractionReason: z.string().nullable(), retractedAt: z.string().nullable(),
  }).describe('held: waiting for the lab\'s review (partners receive sequence.processed once released)'),
  caution: z.string(),
})
export type SequenceView = z.infer<typeof sequenceView>

export const methodView = z.object({
  id: z.uuid(), instrument: z.string(), version: z.number().int(), name: z.string(), validFrom: z.string(),
  definition: methodDefinition, note: z.string().nullable(), createdAt: z.string(),
  releasePolicy: z.enum(releasePolicies).nullable().describe('null: the lab\'s release policy applies'),
})
export type MethodView = z.infer<typeof methodView>

export const workingStandardView = z.object({
  id: z.uuid(), code: z.string(), version: z.number().int(), name: z.string(),
  values: z.record(z.string(), measured), calibratedAgainst: z.array(z.string()),
  validFrom: z.string(), validTo: z.string().nullable(), note: z.string().nullable(), createdAt: z.string(),
})
export type WorkingStandardView = z.infer<typeof workingStandardView>

/**
 * `sequence.processed` (result-event v2): per sample, the normalised value on the scale with
 * u and k, the raw δ against the reference gas, the method version, the standards and the
 * normalisation figures, and the review caution.
 */
export const sequenceEventData = z.object({
  kind: z.literal('sequence'),
  id: z.uuid(), sequenceId: z.string(), instrument: z.string(), status: z.enum(['processed']),
  processedAt: z.string(), accepted: z.boolean(), flagged: z.boolean(),
  releasedAt: z.string().describe('when the lab released the outcome (this message is sent at release)'),
  reviewedBy: z.string().nullable().describe('the reviewer\'s name; null: released automatically by the lab\'s rule'),
  method: z.object({ id: z.uuid(), version: z.number().int(), name: z.string(), gas: z.string() }),
  samples: z.array(z.object({
    position: z.number().int(), acquisitionId: z.uuid(), runId: z.string(), sampleRef: z.string().nullable(), acquiredAt: z.string(),
    values: z.array(z.object({
      quantity: z.string(), scale: z.string().describe('the international scale (VPDB, VSMOW-SLAP, air) or the corrected ratio\'s name'),
      value: z.number(), u: z.number().describe('combined standard uncertainty (GUM)'), k: z.number(), U: z.number().describe('expanded uncertainty k·u'),
      raw: measured.nullable().describe('δ against the laboratory reference gas (or the measured ratio) before normalisation'),
    })),
    flags: z.array(flag),
  })),
  standards: z.array(z.object({ position: z.number().int(), material: z.string(), role: z.string(), acquiredAt: z.string(), values: z.record(z.string(), scaled), residual: z.record(z.string(), z.number()).nullable() })),
  materials: z.array(z.object({ id: z.string(), kind: z.enum(['reference-material', 'working-standard']), version: z.number().int().nullable(), values: z.record(z.string(), measured) })),
  normalisation: sequenceOutcomeView.shape.normalisation,
  drift: sequenceOutcomeView.shape.drift,
  steps: sequenceOutcomeView.shape.steps,
  flags: z.array(flag),
  caution: z.string(),
})
export type SequenceEventData = z.infer<typeof sequenceEventData>

export const sequenceListQuery = z.object({
  instrument: slug.optional(),
  status: z.enum(['open', 'closed', 'processed', 'failed'], { error: 'must be open, closed, processed or failed' }).optional(),
  flagged: z.enum(['true', 'false']).transform(v => v === 'true').optional(),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
})

export const sequenceListView = z.object({
  items: z.array(z.object({
    id: z.uuid(), sequenceId: z.string(), instrument: z.string(), status: z.enum(['open', 'closed', 'processed', 'failed']),
    declaredLength: z.number().int().nullable(), received: z.number().int(), methodVersion: z.number().int().nullable(),
    flagged: z.boolean(), accepted: z.boolean().nullable().describe('false: an acceptance rule of the method failed; null: not processed'),
    failure: z.string().nullable(), createdAt: z.string(), processedAt: z.string().nullable(),
    reviewState: z.enum(reviewStates),
  })),
  nextCursor: z.string().nullable(),
})
