import type { OpenAPIRegistry, ResponseConfig } from '@asteasolutions/zod-to-openapi'
import { z } from 'zod'
import { certificateVerdict, certificateVerifyInput } from './schemas/certificates'
import { idParams } from './schemas/common'
import { sequenceParams } from './schemas/sequences'

// Certificates of analysis in the OpenAPI document (shared/openapi.ts calls this), with the
// guide to checking one.

type Problems = (...codes: number[]) => Record<string, ResponseConfig>

export const CERTIFICATE_GUIDE = `## Certificates of analysis

A released result (its acquisition's newest released version) and a released sequence each have a certificate, issued once and kept: three files named by the certificate number (\`AW-<year>-<six digits>\`).

- \`certificate.json\`: what is certified, as RFC 8785 canonical JSON (keep it byte for byte): lab, instrument, run or sequence, the geometry, calibration, method, engine and constants versions, whether calibrated, each value with its standard uncertainty \`u\`, coverage factor \`k\` and \`U = k·u\`, the review that released it (who, when, the version it corrects), and the caution.
- \`certificate.jws\`: a detached JWS (RFC 7515 Appendix F) over those bytes, signed with a key of the hub's JWKS (\`/.well-known/jwks.json\`, the same keys as access tokens). The payload part is empty; put back the base64url of the JSON to verify.
- \`certificate.pdf\`: the same content to read and file, with the key id and how to verify it, and both files above embedded as attachments; it says when the result was since corrected or retracted.

A result still held for review, or rejected, has none: 409 \`not-released\` to its lab, 404 to partners (who never learn of unreleased results). A correction is a new version with a certificate of its own; the old certificate keeps verifying, and the verify route says it was corrected.

Verify with jose (Node.js):

\`\`\`js
import { base64url, createRemoteJWKSet, flattenedVerify } from 'jose'
const canonical = await fs.readFile('AW-2026-000123.json')          // the bytes, untouched
const [protectedHeader, , signature] = (await fs.readFile('AW-2026-000123.jws', 'utf8')).trim().split('.')
const keys = createRemoteJWKSet(new URL('https://hub.example/.well-known/jwks.json'))
await flattenedVerify({ protected: protectedHeader, payload: base64url.encode(canonical), signature }, keys) // throws when it does not verify
\`\`\`

Or ask the hub: \`POST /api/v1/certificates/verify\` with \`{ "canonical": "…", "jws": "…" }\` or \`{ "number": "AW-2026-000123" }\` answers the verdict, the signer's key id, what is certified and whether it has since been corrected or retracted. Signed-in users have the same check in the console (*Verify a certificate*).
`

export function registerCertificatePaths(registry: OpenAPIRegistry, keys: { labKey: string, partnerToken: string }, problems: Problems) {
  const files = [
    ['pdf', 'application/pdf', 'The certificate to read and file'],
    ['json', 'application/json', 'What is certified, as RFC 8785 canonical JSON: keep it byte for byte'],
    ['jws', 'application/jose', 'The detached JWS (RFC 7515 Appendix F) over the JSON\'s bytes: header..signature'],
  ] as const
  const idPath = z.object({ id: idParams.shape.id })
  const seqPath = z.object({ sequenceId: sequenceParams.shape.sequenceId })
  for (const [ext, type, what] of files) {
    registry.registerPath({
      method: 'get', path: `/api/v1/results/{id}/certificate.${ext}`, tags: ['Certificates'], summary: `A result's certificate (${ext.toUpperCase()})`,
      description: '`id` is the acquisition\'s id, as for `GET /api/v1/results/{id}`: the certificate of its published result (the newest released version), issued at the first request and kept. A lab key reads its own lab\'s; a partner token, the results of labs that grant it result events. A result held for review or rejected: 409 `not-released` to its lab, 404 to a partner.',
      security: [{ [keys.labKey]: [] }, { [keys.partnerToken]: ['results:read'] }],
      request: { params: idPath }, responses: { 200: { description: what, content: { [type]: { schema: z.string() } } }, ...problems(401, 403, 404, 409, 429) },
    })
    registry.registerPath({
      method: 'get', path: `/api/v1/sequences/{sequenceId}/certificate.${ext}`, tags: ['Certificates'], summary: `A sequence's certificate (${ext.toUpperCase()})`,
      description: 'Each sample\'s normalised values with u, k and U, the normalisation and the method version, for a released sequence of the lab. Held or rejected: 409 `not-released`.',
      security: [{ [keys.labKey]: [] }],
      request: { params: seqPath }, responses: { 200: { description: what, content: { [type]: { schema: z.string() } } }, ...problems(401, 403, 404, 409, 429) },
    })
  }
  registry.registerPath({
    method: 'post', path: '/api/v1/certificates/verify', tags: ['Certificates'], summary: 'Verify a certificate',
    description: 'Public (no credentials), limited per client address (`NUXT_RATE_LIMIT_VERIFY_PER_MINUTE`, 60). Give the two files, or the number alone (the hub checks its own copy; an unknown number is 404). An invalid signature is a verdict (200, `valid: false` with the reason), not an error.',
    request: { body: { content: { 'application/json': { schema: certificateVerifyInput } } } },
    responses: { 200: { description: 'The verdict', content: { 'application/json': { schema: certificateVerdict } } }, ...problems(400, 404, 413, 422, 429) },
  })
}
