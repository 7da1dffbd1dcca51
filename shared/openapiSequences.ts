import type { OpenAPIRegistry, ResponseConfig } from '@asteasolutions/zod-to-openapi'
import { z } from 'zod'
import { instrumentParams, methodInput, methodView, sequenceEventData, sequenceInput, sequenceListQuery, sequenceListView, sequenceMemberInput, sequenceParams, sequenceView, workingStandardInput, workingStandardView } from './schemas/sequences'
import { webhookMessage } from './schemas/webhooks'

// The sequence, method and standard routes of API v1 and the `sequence.processed` webhook, in
// the OpenAPI document (shared/openapi.ts calls this).

type Problems = (...codes: number[]) => Record<string, ResponseConfig>

export function registerSequencePaths(registry: OpenAPIRegistry, labKey: string, problems: Problems, signedHeaders: z.ZodObject) {
  const security = [{ [labKey]: [] }]
  const Sequence = registry.register('Sequence', sequenceView)
  const idempotency = z.object({ 'Idempotency-Key': z.string().max(255).optional() })
  const seqPath = z.object({ sequenceId: sequenceParams.shape.sequenceId })
  const slugPath = z.object({ slug: instrumentParams.shape.slug })
  const json = (schema: z.ZodType) => ({ content: { 'application/json': { schema } } })

  registry.registerPath({
    method: 'post', path: '/api/v1/sequences', tags: ['Sequences'], summary: 'Post a sequence, whole or opened', security,
    description: 'A sequence is an ordered set of acquisitions, each with a role (sample, working-standard, reference-gas, blank, monitoring-standard) and, for standards, the material: a reference material\'s id or one of the lab\'s working-standard codes. Without `length`, the `acquisitions` are the whole sequence: it is closed and processed at once under the instrument\'s method. With `length`, the sequence stays open until that many positions are filled (`POST /api/v1/sequences/{sequenceId}/acquisitions`) or it is closed. Every refusal that can be known before storing (unknown instrument, material or method version, duplicate positions or runs, a standard without a material) stores nothing. Each acquisition is ingested as by `POST /api/v1/acquisitions`; when one of them is refused by the engine, those before it stay accepted and the sequence stays open for the rest. A sequence stored but not processable (a method that cannot anchor the scale) is kept as `failed` and answered with a 422 problem naming the method\'s field. The same `sequenceId` with the same body replays (200); with another body, 409.',
    request: { headers: idempotency, body: json(sequenceInput) },
    responses: { 201: { description: 'Opened (and processed when complete)', ...json(Sequence) }, 200: { description: 'A replay', ...json(Sequence) }, ...problems(400, 401, 403, 409, 413, 422, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/sequences', tags: ['Sequences'], summary: 'List the lab\'s sequences', security,
    request: { query: sequenceListQuery }, responses: { 200: { description: 'Newest first, in cursor pages', ...json(sequenceListView) }, ...problems(400, 401, 403, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/sequences/{sequenceId}', tags: ['Sequences'], summary: 'A sequence with its outcome', security,
    request: { params: seqPath }, responses: { 200: { description: 'The sequence, its acquisitions, the method version, the outcome (normalised values, normalisation, drift, steps) and control-chart violations', ...json(Sequence) }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'post', path: '/api/v1/sequences/{sequenceId}/acquisitions', tags: ['Sequences'], summary: 'Post one acquisition into an open sequence', security,
    description: 'Any order. A taken position is 409 (the same run at the same position again is a replay, 200); a position past the declared length, a standard without a material or an unknown material is 422. The last position of the declared length closes and processes the sequence.',
    request: { params: seqPath, headers: idempotency, body: json(sequenceMemberInput) },
    responses: { 201: { description: 'Added (processed when it completed the sequence)', ...json(Sequence) }, 200: { description: 'A replay', ...json(Sequence) }, ...problems(400, 401, 403, 404, 409, 413, 422, 429) },
  })
  registry.registerPath({
    method: 'post', path: '/api/v1/sequences/{sequenceId}/close', tags: ['Sequences'], summary: 'Close an open sequence and process it', security,
    request: { params: seqPath }, responses: { 200: { description: 'Processed (or as it was, when closed before)', ...json(Sequence) }, ...problems(401, 403, 404, 409, 422, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/instruments/{slug}/method', tags: ['Methods and standards'], summary: 'The instrument\'s method in force now', security,
    request: { params: slugPath }, responses: { 200: { description: 'The method version', ...json(methodView) }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/instruments/{slug}/methods', tags: ['Methods and standards'], summary: 'Every method version of the instrument', security,
    request: { params: slugPath }, responses: { 200: { description: 'Newest first', ...json(z.object({ items: z.array(methodView) })) }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'post', path: '/api/v1/instruments/{slug}/methods', tags: ['Methods and standards'], summary: 'Register a new method version', security,
    description: 'The gas, the corrections in the order they run, the anchor standards and the acceptance rules. Every material the method names must be a reference material or one of the lab\'s working standards. Valid from `validFrom`; a sequence runs under the version in force at its first acquisition unless it names `methodVersion`.',
    request: { params: slugPath, body: json(methodInput) }, responses: { 201: { description: 'The new version', ...json(methodView) }, ...problems(400, 401, 403, 404, 422, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/standards', tags: ['Methods and standards'], summary: 'The lab\'s working standards, every version', security,
    responses: { 200: { description: 'By code, newest version first', ...json(z.object({ items: z.array(workingStandardView) })) }, ...problems(401, 403, 429) },
  })
  registry.registerPath({
    method: 'post', path: '/api/v1/standards', tags: ['Methods and standards'], summary: 'Register a working standard\'s new version', security,
    description: 'Values per quantity on the international scale with their standard uncertainties, calibrated against reference materials of the registry; the previous version\'s validity ends where this one begins.',
    request: { body: json(workingStandardInput) }, responses: { 201: { description: 'The new version', ...json(workingStandardView) }, ...problems(400, 401, 403, 422, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/reference-materials', tags: ['Methods and standards'], summary: 'The international reference materials and their assigned values', security,
    responses: { 200: { description: 'Each with its source; `fromMemory` marks values typed from memory of the source', ...json(z.object({ items: z.array(z.object({ id: z.string(), name: z.string(), values: z.record(z.string(), z.object({ value: z.number(), u: z.number() })), source: z.string(), fromMemory: z.boolean() })) })) }, ...problems(401, 403, 429) },
  })
  registry.registerWebhook({
    method: 'post', path: 'sequence.processed', tags: ['Webhooks'], summary: 'A lab released a processed sequence (result-event v2)',
    description: 'Sent to endpoints on result-event v2 that take this event type, from labs that granted it, when the lab releases the sequence\'s outcome (by a reviewer, `reviewedBy`, or at once by the method\'s or lab\'s automatic rule, `reviewedBy` null); a held or rejected outcome is never sent. Per sample: each quantity on its international scale (`scale`) with its combined standard uncertainty `u`, coverage factor `k` and `U = k·u`, and the raw δ against the laboratory reference gas; the method version, the standards measured with their values, the materials and versions used, the normalisation (slope, intercept, residuals, anchors), drift fits, every correction step with its source and parameters, and the review caution.',
    request: { headers: signedHeaders, body: json(webhookMessage.extend({ data: z.object({ eventId: z.string(), lab: z.string(), sequence: z.number().int() }).extend(sequenceEventData.shape) })) },
    responses: { 200: { description: 'Any 2xx: received' } },
  })
}
