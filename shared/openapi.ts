import './zodOpenapi'
import { OpenAPIRegistry, OpenApiGeneratorV31 } from '@asteasolutions/zod-to-openapi'
import { z } from 'zod'
import { CAUTION } from './caution'
import { acquisitionInput, acquisitionListQuery } from './schemas/acquisitions'
import { idParams, problemDocument } from './schemas/common'
import { schemaParams } from './schemas/exchange'
import { eventFeedQuery, peakQuery, tokenRequest } from './schemas/partners'
import { DEFAULT_RETRY_SCHEDULE_S, correctedEventData, resultEventData, retractedEventData, thinResultEventData, webhookMessage } from './schemas/webhooks'
import { acquisitionListView, acquisitionView, engineResultView, labAcquisitionView, eventFeedView, exchangeSchemaList, jwksView, peakListView, tokenView, uploadAccepted, uploadStatusView } from './schemas/responses'
import { registerSequencePaths } from './openapiSequences'
import { CERTIFICATE_GUIDE, registerCertificatePaths } from './openapiCertificates'


// The OpenAPI 3.1 document of API v1, generated from the zod schemas that the routes
// validate with; `npm run openapi` writes it to openapi/openapi.json.



const example = {
  instrument: 'irms-north', runId: 'carb-2026-11-30-017', acquiredAt: '2026-11-30T14:05:00Z', sampleRef: 'CARB-1017',
  settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
  sweep: { reading: 'field', unit: 'T', values: [0.4771, 0.4772, 0.4773] },
  detectors: [{ unit: 'fA', values: [8.1, 9.0, 8.4] }],
  processing: { formulas: ['CO2', '[13C]O2'], ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }] },
}

const human = (s: number) => s < 60 ? `${s} s` : s < 3600 ? `${s / 60} min` : `${s / 3600} h`

/** For integrators: how webhooks behave and how to check a signature. */
const WEBHOOK_GUIDE = `## Webhooks

Integrators add endpoints in the console (one partner's endpoints, event types, labs within the partner's grants, payload schema version). Each message is a POST of JSON signed per [Standard Webhooks](https://www.standardwebhooks.com/) with the endpoint's \`whsec_\` secret.

- **Only what a lab released.** Labs review results before release (or release them at once by their own rule). You receive \`result.released\` when a result is released, \`result.corrected\` when a later version replaces a released one (\`data.correction\` names the previous result and the reason), \`result.retracted\` when a lab withdraws one (it stays readable, marked), and \`sequence.processed\` when a sequence is released. Every result carries \`review\` (state, released at and by whom, version, supersedes, reasons), \`caution\`, \`calibrated\` and \`versions\`. \`result.created\` was retired with review.
- **At least once.** A message can arrive more than once; every copy has the same \`webhook-id\`: deduplicate on it.
- **Order.** Messages can arrive out of order. \`data.sequence\` increases by one per event of a lab: order by it, and fetch a gap from \`GET /api/v1/events\`. An endpoint can instead ask for **ordered delivery** (\`ordered: true\`, off by default): one message at a time, in the order the events were recorded (a lab's by its sequence); the next waits until the one before is received or given up after its last retry. Its cost: one message in flight, so at most about one message per round trip of your receiver, and a failing message holds back everything after it for as long as its retries last (up to about a day).
- **Limits per endpoint.** Each endpoint has at most \`maxInFlight\` messages in flight at once (the hub's default when unset), counted across all of the hub's workers, and at most \`ratePerSecond\` messages a second if set (a burst of one second's messages, then that rate); the hub's admins set the highest values an integrator may choose. Deliveries are taken fairly across endpoints, so a slow or unreachable endpoint fills only its own slots and never delays another endpoint's messages.
- **Slow down and circuit.** A \`429\` or \`503\` with \`Retry-After\` pauses the whole endpoint until then (a \`429\` without it, for a second). After 10 messages in a row fail on their first try (the default; a retry of a message that failed before does not count, since it says more about that message than about the endpoint) the endpoint's circuit opens: one message, a never-tried one where there is one, probes it every 30 s, and the backlog is sent only once a probe is received. While the circuit is open, messages wait rather than spend their retries (they resume after a received probe); the endpoint is still disabled after 3 days without a success. Resuming the endpoint in the console closes the circuit.
- **Answer fast.** Any 2xx within 15 s counts as received. Anything else is retried after ${DEFAULT_RETRY_SCHEDULE_S.map(human).join(', ')} (each ±10 %, about a day in all), or later when you send \`Retry-After\`. Then the delivery is dead; an integrator can replay it from the delivery log. 3xx is a failure (redirects are not followed); 410 Gone disables the endpoint at once; an endpoint failing for 3 days is disabled and its integrators are e-mailed.
- **Rotation.** A new secret can overlap the old one: during the overlap \`webhook-signature\` carries two signatures, and either verifies.

Verify a message (Node.js, with the \`standardwebhooks\` package):

\`\`\`js
import { Webhook } from 'standardwebhooks'
const payload = new Webhook(process.env.ARCWISE_WHSEC).verify(rawBody, request.headers) // throws when it does not verify
\`\`\`

Python (\`pip install standardwebhooks\`):

\`\`\`python
from standardwebhooks.webhooks import Webhook
payload = Webhook(os.environ["ARCWISE_WHSEC"]).verify(raw_body, headers)
\`\`\`

Shell (OpenSSL): the signature is base64 HMAC-SHA256 of \`id.timestamp.body\` under the base64-decoded part of the secret after \`whsec_\`:

\`\`\`sh
key=$(printf %s "\${ARCWISE_WHSEC#whsec_}" | base64 -d | xxd -p -c 256)
printf '%s.%s.%s' "$WEBHOOK_ID" "$WEBHOOK_TIMESTAMP" "$(cat body.json)" | openssl dgst -sha256 -mac HMAC -macopt "hexkey:$key" -binary | base64
# compare with the part after "v1," of webhook-signature
\`\`\`
`

/** For partners: how access is granted and the three ways to take results (issue 21, point 8). */
const PARTNER_GUIDE = `A partner (a client lab, a regulator, a data team) receives the results of the labs that grant it access. A lab manager grants a partner the lab's results in the console, choosing the event types; nothing of a lab that has not granted you access is ever shown, and "not granted" answers 404 like "not there".

Your integrators work in the console: they create **API clients** (an id \`awc_…\` and a secret shown once) and **webhook endpoints**. With a client, trade the id and secret for a 5-minute access token, then call the partner routes with it:

\`\`\`sh
curl -s -X POST https://arcwise.example.org/api/v1/oauth/token \\
  -d grant_type=client_credentials -d client_id=awc_Jd93kQx0LmPz \\
  -d client_secret="$ARCWISE_CLIENT_SECRET" -d scope="results:read events:read"
# {"access_token":"eyJhbGciOiJFUzI1NiIs…","token_type":"Bearer","expires_in":300,"scope":"results:read events:read"}
curl -s -H "Authorization: Bearer $TOKEN" "https://arcwise.example.org/api/v1/events?limit=50"
\`\`\`

Three ways to take results, to mix as suits you:

- **Webhooks** (pushed as they are computed, signed): see *Webhooks* below.
- **The event feed** (\`GET /api/v1/events\`, pulled): for systems behind a firewall, or to fill a gap in the webhook sequence. Keep \`nextCursor\` and pass it back.
- **Reads** of one result (\`GET /api/v1/results/{id}\`) and **peaks by m/z** across every granted lab (\`GET /api/v1/peaks?mzMin=43.98&mzMax=44.00\`).

A token is refused (401) once expired or once its client is revoked; ask a new one rather than keeping it.`

export function buildOpenApiDocument() {
  const registry = new OpenAPIRegistry()
  const labKey = registry.registerComponent('securitySchemes', 'labKey', { type: 'http', scheme: 'bearer', description: 'A lab key (`awk_…`), issued in the console by a lab manager or admin.' })
  const partnerToken = registry.registerComponent('securitySchemes', 'partnerToken', { type: 'oauth2', flows: { clientCredentials: { tokenUrl: '/api/v1/oauth/token', scopes: { 'results:read': 'read granted results', 'events:read': 'pull the event feed', 'peaks:read': 'query peaks by m/z' } } } })
  const Problem = registry.register('Problem', problemDocument.openapi({ description: 'RFC 9457 problem document; `errors` names each bad field by its path.' }))
  const Acquisition = registry.register('Acquisition', acquisitionView)
  const LabAcquisition = registry.register('LabAcquisition', labAcquisitionView)
  const Result = registry.register('Result', engineResultView)
  const problems = (...codes: number[]) => Object.fromEntries(codes.map(c => [String(c), { description: { 400: 'Malformed request', 401: 'Missing, wrong, revoked or expired credentials', 403: 'Missing scope', 404: 'Not found (or not yours)', 409: 'Conflict', 413: 'Body too large', 415: 'Unsupported media type', 422: 'Validation failed', 429: 'Rate limited; see Retry-After' }[c] ?? 'Error', content: { 'application/problem+json': { schema: Problem } } }]))
  const idPath = z.object({ id: idParams.shape.id })

  registry.registerPath({
    method: 'post', path: '/api/v1/acquisitions', tags: ['Lab systems'], summary: 'Post an acquisition',
    description: 'Validates the raw readings, converts them to m/z with the instrument\'s geometry and calibration in force at `acquiredAt`, finds and assigns peaks, computes the requested ratios, and stores everything (with the outbox event) in one transaction. The same `runId` with the same body answers the stored result (200); with another body, 409. `Idempotency-Key` (IETF draft) replays a stored answer.',
    security: [{ [labKey.name]: [] }],
    request: {
      headers: z.object({ 'Idempotency-Key': z.string().max(255).optional(), 'Arcwise-Schema-Version': z.string().optional().describe('acquisition schema version (default 1); a deprecated version answers with Deprecation and Sunset headers') }),
      body: { content: {
        'application/json': { schema: acquisitionInput.openapi({ example }) },
        'text/csv': { schema: z.string().describe('`# key: value` lines for instrument, runId, acquiredAt, sampleRef, settings ("# acceleratingVoltage: 3 kV ± 0.0006"), formulas and ratio; then a header row with units in brackets ("field [T],detector [fA]"); then one row per point. A byte-order mark and CRLF are fine.'), example: '# instrument: irms-north\n# runId: carb-17\n# acquiredAt: 2026-11-30T14:05:00Z\n# acceleratingVoltage: 3 kV\nfield [T],detector [fA]\n0.4771,8.1\n0.4772,9.0\n' },
        'chemical/x-jcamp-dx': { schema: z.string().describe('JCAMP-DX 5.01 with the swept reading as X (XUNITS T, MT, G, KG, V or KV) and the detector as Y; settings and metadata as ##$ACCELERATING VOLTAGE=, ##$INSTRUMENT=, ##$RUN ID=, ##LONGDATE=.') },
        'application/mzml+xml': { schema: z.string().describe('mzML 1.1: the first spectrum\'s m/z (MS:1000514) and intensity (MS:1000515) arrays; metadata as userParam (instrument, runId, acquiredAt). Entity declarations are refused.') },
        'multipart/form-data': { schema: z.object({ file: z.string().describe('one of the formats above, by its part type or file extension') }) },
      } },
    },
    responses: {
      201: { description: 'Accepted and processed', content: { 'application/json': { schema: Acquisition } } },
      200: { description: 'A replay of an acquisition accepted before', content: { 'application/json': { schema: Acquisition } } },
      202: { description: `More than ${250_000} points: stored and processed in the background; follow statusUrl`, content: { 'application/json': { schema: uploadAccepted } } },
      ...problems(400, 401, 403, 409, 413, 415, 422, 429),
    },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/acquisitions', tags: ['Lab systems'], summary: 'List the lab\'s acquisitions', security: [{ [labKey.name]: [] }],
    request: { query: acquisitionListQuery },
    responses: { 200: { description: 'Newest first, in cursor pages', content: { 'application/json': { schema: acquisitionListView } } }, ...problems(400, 401, 403, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/acquisitions/{id}', tags: ['Lab systems'], summary: 'One acquisition with its result', security: [{ [labKey.name]: [] }],
    request: { params: idPath }, responses: { 200: { description: 'The acquisition', content: { 'application/json': { schema: LabAcquisition } } }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/acquisitions/{id}/result', tags: ['Lab systems'], summary: 'The result alone', security: [{ [labKey.name]: [] }],
    request: { params: idPath }, responses: { 200: { description: 'The result', content: { 'application/json': { schema: Result } } }, ...problems(401, 403, 404, 429) },
  })
  for (const [ext, type, what] of [['csv', 'text/csv', 'CSV: m/z and signal per point'], ['jdx', 'chemical/x-jcamp-dx', 'JCAMP-DX 5.01, resampled onto even m/z']] as const) {
    registry.registerPath({
      method: 'get', path: `/api/v1/acquisitions/{id}/spectrum.${ext}`, tags: ['Lab systems'], summary: `Spectrum as ${ext.toUpperCase()}`, security: [{ [labKey.name]: [] }],
      request: { params: idPath }, responses: { 200: { description: what, content: { [type]: { schema: z.string() } } }, ...problems(401, 403, 404, 429) },
    })
  }
  registry.registerPath({
    method: 'post', path: '/api/v1/oauth/token', tags: ['Partners'], summary: 'Get an access token (client credentials)',
    description: 'OAuth 2.0 client credentials (RFC 6749 §4.4). The token is a JWT in the RFC 9068 profile, valid for 5 minutes, verifiable with the keys at `/.well-known/jwks.json`.',
    request: { body: { content: { 'application/x-www-form-urlencoded': { schema: tokenRequest.openapi({ example: { grant_type: 'client_credentials', client_id: 'awc_Jd93kQx0LmPz', client_secret: 'awcs_q7VJ2mZ0cT9xWb4LrN8sKd1YhE6pGf3uAo5iMz2Xy0w', scope: 'results:read events:read' } }) } } } },
    responses: { 200: { description: 'An access token', content: { 'application/json': { schema: tokenView.openapi({ example: { access_token: 'eyJhbGciOiJFUzI1NiIsImtpZCI6IjIwMjYtMTEtMzAifQ.eyJpc3MiOiJodHRwczovL2FyY3dpc2UuZXhhbXBsZS5vcmciLCJzdWIiOiJhd2NfSmQ5M2tReDBMbVB6In0.3bXhQ0sT', token_type: 'Bearer', expires_in: 300, scope: 'results:read events:read' } }) } } }, ...problems(400, 401) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/events', tags: ['Partners'], summary: 'Pull the event feed', security: [{ [partnerToken.name]: ['events:read'] }],
    description: 'Result events of the labs that granted you access, oldest first. Keep `nextCursor` and pass it back; delivery by pull is at least once, so deduplicate on the event `id`.',
    request: { query: eventFeedQuery }, responses: { 200: { description: 'Events after the cursor', content: { 'application/json': { schema: eventFeedView } } }, ...problems(400, 401, 403, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/results/{id}', tags: ['Partners'], summary: 'A granted result', security: [{ [partnerToken.name]: ['results:read'] }],
    request: { params: idPath }, responses: { 200: { description: 'The acquisition and its result', content: { 'application/json': { schema: Acquisition } } }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/peaks', tags: ['Partners'], summary: 'Peaks by m/z window across granted labs', security: [{ [partnerToken.name]: ['peaks:read'] }],
    description: 'Peaks whose centroid lies in [mzMin, mzMax], from every lab that granted you `results:read`, newest acquisition first. The window is at most 50 wide; narrow it to a line and its tolerance to find one species across labs.',
    request: { query: peakQuery }, responses: { 200: { description: 'Peaks in the window', content: { 'application/json': { schema: peakListView.openapi({ example: { items: [
      { id: 90211, mz: 43.98977, area: 3.918e-10, species: 'CO2', charge: 1, lab: 'saltmarsh-isotopes', acquisitionId: '0d6c2a4e-1f3b-4c8e-9a71-5e2d8b6f4c10', acquiredAt: '2026-11-30T14:05:00Z' },
      { id: 90178, mz: 43.98991, area: 4.102e-10, species: 'CO2', charge: 1, lab: 'kestrel-leaktest', acquisitionId: '7a1e9c33-52d0-4b6f-8e24-c9b1d0a7e5f2', acquiredAt: '2026-11-30T11:42:00Z' },
    ], nextCursor: '90178' } }) } } }, ...problems(400, 401, 403, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/uploads/{id}', tags: ['Lab systems'], summary: 'Status of an upload processed in the background', security: [{ [labKey.name]: [] }],
    request: { params: idPath }, responses: { 200: { description: 'pending, processing, processed (with acquisitionUrl) or failed (with the problem)', content: { 'application/json': { schema: uploadStatusView } } }, ...problems(401, 403, 404, 429) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/schemas', tags: ['Exchange schemas'], summary: 'The exchange schemas and their status',
    responses: { 200: { description: 'Every version, with status and sunset date', content: { 'application/json': { schema: exchangeSchemaList } } } },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/schemas/{name}/{version}', tags: ['Exchange schemas'], summary: 'One exchange schema as JSON Schema (2020-12)',
    request: { params: schemaParams },
    responses: { 200: { description: 'The JSON Schema; a deprecated version carries Deprecation and Sunset headers', content: { 'application/schema+json': { schema: z.record(z.string(), z.unknown()) } } }, ...problems(400, 404) },
  })
  registry.registerPath({
    method: 'get', path: '/api/v1/openapi.json', tags: ['Documentation'], summary: 'This document',
    responses: { 200: { description: 'OpenAPI 3.1', content: { 'application/json': { schema: z.record(z.string(), z.unknown()) } } } },
  })
  registry.registerPath({
    method: 'get', path: '/.well-known/jwks.json', tags: ['Partners'], summary: 'Token-signing public keys',
    responses: { 200: { description: 'RFC 7517 key set', content: { 'application/json': { schema: jwksView } } } },
  })

  const signedHeaders = z.object({
    'webhook-id': z.string().describe('the delivery\'s id: the same on every retry of one message; deduplicate on it'),
    'webhook-timestamp': z.string().describe('Unix seconds of this attempt; refuse messages older than a few minutes'),
    'webhook-signature': z.string().describe('space-separated `v1,<base64 HMAC-SHA256>` signatures of `id.timestamp.body`; two during a secret rotation'),
  })
  const released = { eventId: '5b0f…', lab: 'saltmarsh-isotopes', sequence: 412, id: '0d6c…', runId: 'carb-2026-11-30-017', instrument: 'irms-north', acquiredAt: '2026-11-30T14:05:00Z', sampleRef: 'CARB-1017', status: 'processed', receivedAt: '2026-11-30T14:05:02.118Z', result: '…' }
  const responses = { 200: { description: 'Any 2xx: received. 3xx is a failure (redirects are not followed); 410 disables the endpoint; 429 and 503 may carry Retry-After.' } }
  registry.registerWebhook({
    method: 'post', path: 'result.released', tags: ['Webhooks'], summary: 'A lab released a result',
    description: `Sent when a lab releases an acquisition's result for the first time: by a reviewer, or at once by the lab's automatic rule (\`review.reviewedBy\` null). Results are held for the lab's review first; a held or rejected result is never sent. \`data\` is the acquisition and its result, as \`GET /api/v1/results/{id}\` answers it (with its \`review\` block, \`caution\`, \`calibrated\` and \`versions\`), with \`eventId\`, \`lab\` and the lab's \`sequence\`. A message over ${256} KiB is sent thin: the summary, \`thin: true\` and \`resultUrl\` to fetch the rest. This event replaced \`result.created\` (sent for every computed result before review existed).`,
    request: { headers: signedHeaders, body: { content: { 'application/json': { schema: webhookMessage.extend({ data: z.union([resultEventData, thinResultEventData]) }).openapi({ example: { type: 'result.released', timestamp: '2026-11-30T14:05:02.118Z', data: released } }) } } } },
    responses,
  })
  registry.registerWebhook({
    method: 'post', path: 'result.corrected', tags: ['Webhooks'], summary: 'A lab released a corrected version of a result it had released',
    description: 'Sent when a later version of an acquisition\'s result (reprocessed under a new calibration, geometry, method or engine) is released while an earlier version had been released. `data` is the new version as in `result.released`, with `correction`: the result it replaces and the lab\'s reason. Both versions stay stored; reads answer the newest released one. Sent to endpoints on result-event v2 or later (v1 does not describe it). `review.supersedes` names the same earlier version as `correction.previousResultId`: the one you were shown before.',
    request: { headers: signedHeaders, body: { content: { 'application/json': { schema: webhookMessage.extend({ data: correctedEventData }).openapi({ example: { type: 'result.corrected', timestamp: '2026-12-02T09:00:00Z', data: { ...released, correction: { previousResultId: '7a1e…', previousVersion: 1, reason: 'Calibration of 2026-11-28 re-fitted with the corrected reference gas.' } } } }) } } } },
    responses,
  })
  registry.registerWebhook({
    method: 'post', path: 'result.retracted', tags: ['Webhooks'], summary: 'A lab withdrew a result it had released',
    description: 'Sent when a lab retracts a released result, with the reason. The result stays readable, marked `review.state: retracted`; do not use it. Sent to endpoints on result-event v2 or later (v1 does not describe it).',
    request: { headers: signedHeaders, body: { content: { 'application/json': { schema: webhookMessage.extend({ data: retractedEventData }).openapi({ example: { type: 'result.retracted', timestamp: '2026-12-03T10:00:00Z', data: { eventId: '6c2d…', lab: 'saltmarsh-isotopes', sequence: 415, kind: 'retraction', resultId: '9e4b…', id: '0d6c…', runId: 'carb-2026-11-30-017', instrument: 'irms-north', version: 1, reason: 'Sample label mix-up found at the weekly audit.', retractedAt: '2026-12-03T10:00:00Z', review: '…' } } }) } } } },
    responses,
  })
  registerSequencePaths(registry, labKey.name, problems, signedHeaders)
  registerCertificatePaths(registry, { labKey: labKey.name, partnerToken: partnerToken.name }, problems)
  registry.registerWebhook({
    method: 'post', path: 'webhook.test', tags: ['Webhooks'], summary: 'A test message sent from the console',
    request: { headers: signedHeaders, body: { content: { 'application/json': { schema: webhookMessage } } } },
    responses: { 200: { description: 'Any 2xx: received' } },
  })

  return new OpenApiGeneratorV31(registry.definitions).generateDocument({
    openapi: '3.1.0',
    info: {
      title: 'Arcwise API', version: '1.0.0',
      description: [
        '[← Back to the Arcwise console](/console)',
        '',
        'Lab systems post raw acquisitions from magnetic-sector mass spectrometers with a lab key; Arcwise converts them to m/z with the instrument\'s registered geometry, assigns peaks, computes isotope ratios with uncertainties, and makes results available to granted partners by pull feed.',
        '',
        `**Caution.** ${CAUTION}`,
        '',
        'Errors are RFC 9457 problem documents (`application/problem+json`) naming each bad field in `errors[].path`.',
        '',
        WEBHOOK_GUIDE,
        '',
        CERTIFICATE_GUIDE,
      ].join('\n'),
    },
    servers: [{ url: '/' }],
    tags: [
      { name: 'Lab systems', description: 'For a lab\'s own software: post acquisitions (JSON, CSV, JCAMP-DX, mzML) with a lab key and read back results. The console\'s upload form offers a template of each format.' },
      { name: 'Partners', description: PARTNER_GUIDE },
    ],
  })
}
