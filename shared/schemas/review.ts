import { z } from 'zod'
import { releasePolicies } from './lifecycle'

// What a lab's reviewer sends: release, rejection and retraction of results and sequences,
// and the lab's release settings (ISO/IEC 17025:2017 §7.8.1: results are reviewed and
// authorised before release; §7.8.8: an amended report says what it replaces and why).

const note = (what: string) => z.string({ error: 'is required' }).trim().min(1, `${what} is required`).max(2000)

export const releaseInput = z.object({ comment: z.string().trim().max(2000).optional() }).strict()
export const rejectInput = z.object({ comment: note('a comment') }).strict()
export const retractInput = z.object({ reason: note('a reason') }).strict()

/** Bulk release from the review queue: every id named, all or nothing. */
export const bulkReleaseInput = z.object({
  resultIds: z.array(z.uuid({ error: 'must be a result id' })).min(1, 'choose at least one result').max(200),
  comment: z.string().trim().max(2000).optional(),
}).strict()

/** A QC flag code as the engine writes them (kebab-case). */
const qcCode = z.string().trim().regex(/^[a-z][a-z0-9-]{0,63}$/, 'a QC flag code is lowercase letters, digits and hyphens')

export const releaseSettingsInput = z.object({
  releasePolicy: z.enum(releasePolicies, { error: `must be one of ${releasePolicies.join(', ')}` }),
  autoReleaseAllows: z.array(qcCode).max(50).default([]).transform(codes => [...new Set(codes)]),
  fourEyes: z.boolean(),
}).strict()
export type ReleaseSettingsInput = z.infer<typeof releaseSettingsInput>

export const reviewQueueQuery = z.object({
  kind: z.enum(['results', 'sequences']).default('results'),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
})

export const labResultParams = z.object({ id: z.uuid(), resultId: z.uuid({ error: 'must be a result id' }) })
export const labSequenceParams = z.object({ id: z.uuid(), sequenceId: z.uuid({ error: 'must be a sequence id' }) })
