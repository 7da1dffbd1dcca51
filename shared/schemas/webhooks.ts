import { z } from 'zod'
import { uuid } from './common'
import { acquisitionView, resultCorrection, resultRetractedData } from './responses'
import { eventTypes } from './partners'

// Webhook endpoints, their deliveries and replays: the shapes the console API validates and
// the console's forms check before sending.

/** The delivery retry schedule in seconds after each failed attempt (about a day in all). */
export const DEFAULT_RETRY_SCHEDULE_S = [5, 300, 1800, 7200, 18000, 36000, 50400, 72000, 86400]

/** How each attempt ended; the class decides whether and when it is tried again. */
export const attemptClasses = ['success', 'client-error', 'server-error', 'timeout', 'connection-failed', 'redirect-refused', 'guard-refused', 'payload-too-large'] as const
export type AttemptClass = (typeof attemptClasses)[number]

export const TEST_EVENT = 'webhook.test'

const endpointUrl = z.string({ error: 'is required' }).trim().max(2000, 'must be at most 2000 characters')
  .pipe(z.url({ protocol: /^https?$/, error: 'must be an http or https URL' }))

// Per-endpoint delivery limits (issue 22). These are the widest bounds; the hub's admins set
// the ones integrators may use (the server names the field when a value is past them).
const maxInFlight = z.number({ error: 'must be a whole number' }).int('must be a whole number').min(1, 'must be at least 1').max(1000, 'may be at most 1000')
  .nullable().describe('sends in flight at once to this endpoint, across every worker; null: the hub\'s default')
const ratePerSecond = z.number({ error: 'must be a number' }).min(0.1, 'must be at least 0.1 a second').max(100_000, 'may be at most 100000 a second')
  .nullable().describe('sends per second at most; null: no limit beyond the in-flight one')
const ordered = z.boolean({ error: 'must be true or false' })
  .describe('deliver one at a time in the order events were recorded: the next waits until the one before succeeds or dies')

export const endpointInput = z.object({
  url: endpointUrl,
  description: z.string().trim().max(500).default(''),
  eventTypes: z.array(z.enum(eventTypes, { error: `must be one of ${eventTypes.join(', ')}` })).min(1, 'choose at least one event type')
    .default([...eventTypes]).transform(s => [...new Set(s)]),
  labIds: z.array(uuid).max(100).default([]).transform(s => [...new Set(s)]),
  // result-event v2: v1 (deprecated) does not describe processed sequences.
  schemaVersion: z.number().int().min(1).default(2),
  maxInFlight: maxInFlight.default(null),
  ratePerSecond: ratePerSecond.default(null),
  ordered: ordered.default(false),
}).strict()
export type EndpointInput = z.infer<typeof endpointInput>

export const endpointUpdate = z.object({
  url: endpointUrl.optional(),
  description: z.string().trim().max(500).optional(),
  eventTypes: endpointInput.shape.eventTypes.optional(),
  labIds: z.array(uuid).max(100).transform(s => [...new Set(s)]).optional(),
  schemaVersion: z.number().int().min(1).optional(),
  // Pause and resume; `active` also brings a disabled endpoint back.
  status: z.enum(['active', 'paused'], { error: 'must be active or paused' }).optional(),
  maxInFlight: maxInFlight.optional(),
  ratePerSecond: ratePerSecond.optional(),
  ordered: ordered.optional(),
}).strict()
export type EndpointUpdate = z.infer<typeof endpointUpdate>

export const secretRotation = z.object({
  // How long the old secret keeps signing beside the new one, so receivers can switch over.
  overlapHours: z.number().min(0).max(168, 'may be at most 168 hours (a week)').default(24),
}).strict()

export const endpointParams = z.object({ id: uuid, endpointId: uuid })
export const deliveryParams = z.object({ id: uuid, deliveryId: uuid })
export const deliveryAttemptParams = deliveryParams.extend({ attemptId: z.coerce.number().int().positive().max(Number.MAX_SAFE_INTEGER) })

export const deliveryFilter = z.object({
  endpoint: uuid.optional(),
  status: z.enum(['pending', 'failing', 'succeeded', 'dead']).optional(),
  eventType: z.string().max(60).optional(),
  from: z.iso.datetime({ offset: true }).optional(),
  to: z.iso.datetime({ offset: true }).optional(),
})
export const deliveryListQuery = deliveryFilter.extend({
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
})

/** Bulk replay: every failing or dead delivery that matches the filter. */
export const replayFilter = deliveryFilter.omit({ status: true }).extend({
  status: z.enum(['failing', 'dead']).default('dead'),
}).strict()

/** What a `result.released` message carries in `data`: the released result with its review block, with where it came from. */
export const resultEventData = acquisitionView.extend({
  eventId: z.uuid(),
  lab: z.string().describe('slug of the lab the result came from'),
  sequence: z.number().int().describe('per-lab sequence number, increasing by one per event: order by it'),
})

/** What a `result.corrected` message carries: the newly released version, and the one it replaces with the reason. */
export const correctedEventData = resultEventData.extend({ correction: resultCorrection })

/** What a `result.retracted` message carries. */
export const retractedEventData = resultRetractedData.extend({ eventId: z.uuid(), lab: z.string(), sequence: z.number().int() })

/** A message too large to send whole: the summary and where to fetch the rest (never truncated). */
export const thinResultEventData = acquisitionView.pick({ id: true, runId: true, instrument: true, acquiredAt: true, sampleRef: true, status: true, receivedAt: true }).extend({
  eventId: z.uuid(), lab: z.string(), sequence: z.number().int(),
  thin: z.literal(true),
  resultUrl: z.string().describe('GET it with a partner access token (results:read)'),
})

/** The Standard Webhooks envelope every message uses. */
export const webhookMessage = z.object({
  type: z.string().describe('result.released, result.corrected, result.retracted, sequence.processed, or webhook.test for a test message (result.created was retired with the review lifecycle)'),
  timestamp: z.string().describe('when the event happened (ISO 8601); the same on every retry'),
  data: z.union([resultEventData, thinResultEventData, z.record(z.string(), z.unknown())]),
})

/**
 * The benchmark's send loop (`/_bench/send-loop`, only with NUXT_BENCH_ROUTES=true): the
 * worker's send path run `count` times to `url`, `concurrency` at a time, with no claim or record.
 */
export const benchSendLoop = z.object({
  url: z.string(),
  count: z.number().int().min(1).max(100_000),
  concurrency: z.number().int().min(1).max(256),
  body: z.string(),
})
export type BenchSendLoop = z.infer<typeof benchSendLoop>
