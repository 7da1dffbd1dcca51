import { z } from 'zod'
import { displayName } from './common'

export const partnerScopes = ['results:read', 'events:read', 'peaks:read'] as const
export type PartnerScope = (typeof partnerScopes)[number]

export const partnerClientInput = z.object({
  name: displayName,
  scopes: z.array(z.enum(partnerScopes, { error: `must be one of ${partnerScopes.join(', ')}` })).min(1, 'choose at least one scope')
    .default([...partnerScopes]).transform(s => [...new Set(s)]),
}).strict()
export type PartnerClientInput = z.infer<typeof partnerClientInput>

/**
 * What partners can subscribe to. Results reach partners only once the lab releases them:
 * `result.released` (first release), `result.corrected` (a later version released over a
 * released one), `result.retracted`. `result.created` (every computed result at once) was
 * retired with the review lifecycle. `sequence.processed` (sent when the sequence's outcome
 * is released) reaches endpoints on result-event v2 or later (v1 does not describe it).
 */
export const eventTypes = ['result.released', 'result.corrected', 'result.retracted', 'sequence.processed'] as const
export type EventType = (typeof eventTypes)[number]
/** The event types a partner reads results under (grants naming any of them let its reads through). */
export const resultEventTypes = ['result.released', 'result.corrected', 'result.retracted'] as const

export const grantInput = z.object({
  partnerId: z.uuid({ error: 'must be a partner id' }),
  eventTypes: z.array(z.enum(eventTypes)).min(1).default([...eventTypes]),
}).strict()

/** The token endpoint's form body (RFC 6749 §4.4.2). */
export const tokenRequest = z.object({
  grant_type: z.string({ error: 'is required' }).describe('Always client_credentials.'),
  client_id: z.string().max(100).optional(),
  client_secret: z.string().max(200).optional(),
  scope: z.string().max(200).optional(),
})

export const eventFeedQuery = z.object({
  cursor: z.string().max(200).optional(),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  lab: z.string().max(60).optional(),
})

export const peakQuery = z.object({
  mzMin: z.coerce.number().positive().describe('Lower end of the window, inclusive: the measured m/z of the peak\'s centroid (u per elementary charge), e.g. 43.98.'),
  mzMax: z.coerce.number().positive().describe('Upper end of the window, inclusive; greater than mzMin and at most 50 above it, e.g. 44.00.'),
  species: z.string().max(64).optional().describe('Only peaks assigned to this species, as the results name it (e.g. CO2, [13C]O2, [40Ar]).'),
  limit: z.coerce.number().int().min(1).max(500).default(100).describe('Peaks per page, 1 to 500.'),
  cursor: z.coerce.number().int().positive().optional().describe('The previous page\'s nextCursor, to read on.'),
}).refine(q => q.mzMax > q.mzMin, { path: ['mzMax'], message: 'must be greater than mzMin' })
  .refine(q => q.mzMax - q.mzMin <= 50, { path: ['mzMax'], message: 'the m/z window may be at most 50 wide' })

export const partnerClientParams = z.object({ id: z.uuid(), clientId: z.uuid() })
export const grantParams = z.object({ id: z.uuid(), grantId: z.uuid() })
