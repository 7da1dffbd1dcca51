import { z } from 'zod'
import { reprocessJobStates } from './lifecycle'
import { uuid } from './common'

// Reprocessing (issue 20, point 2): what a lab manager selects and why, and the routes' params.
// One source for the console form and the console API.

const instant = z.coerce.date({ error: 'must be a date and time' })

/**
 * A reprocessing job's selection: the instrument (required), and optionally acquisitions
 * acquired in [from, to], those of one sequence, or those a sequence processed under one
 * method version. A reason is required: it becomes every new version's correction reason.
 */
export const reprocessJobInput = z.object({
  instrumentId: z.uuid({ error: 'must be the id of an instrument of this lab' }),
  from: instant.optional(),
  to: instant.optional(),
  sequenceId: z.uuid({ error: 'must be the id of a sequence of this instrument' }).optional(),
  methodVersion: z.number({ error: 'must be a whole number' }).int('must be a whole number').positive('must be 1 or more').optional(),
  reason: z.string({ error: 'is required: say why these results are reprocessed' }).trim()
    .min(3, 'is required: say why these results are reprocessed').max(500, 'must be at most 500 characters'),
}).strict().superRefine((v, ctx) => {
  if (v.from && v.to && v.from > v.to) ctx.addIssue({ code: 'custom', path: ['to'], message: 'must not be before from' })
})
export type ReprocessJobInput = z.infer<typeof reprocessJobInput>

export const reprocessJobListQuery = z.object({
  state: z.enum(reprocessJobStates).optional(),
  instrumentId: uuid.optional(),
})

export const labJobParams = z.object({ id: uuid, jobId: uuid })
export const labResultParams = z.object({ id: uuid, resultId: uuid })

/** Two versions of one acquisition's result to compare; omitted, the newest and the one it supersedes. */
export const resultDiffQuery = z.object({
  from: z.coerce.number({ error: 'must be a version number' }).int().positive().optional(),
  to: z.coerce.number({ error: 'must be a version number' }).int().positive().optional(),
})

/** Releasing a reprocessed version to partners: an optional comment for the review record. */
export const releaseCorrectionInput = z.object({
  comment: z.string().trim().max(1000, 'must be at most 1000 characters').optional(),
}).strict()
