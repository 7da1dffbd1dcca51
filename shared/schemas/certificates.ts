import { z } from 'zod'
import { certificateSubjects, reviewStates } from './lifecycle'

// Certificates of analysis (issue 20): what the verify route takes and answers.

/** AW-<year>-<six digits>, as printed on the PDF. */
export const certificateNumber = z.string({ error: 'is required' }).trim().regex(/^AW-\d{4}-\d{6}$/, 'must be a certificate number like AW-2026-000123')

/**
 * Either the two files a certificate comes as — the canonical JSON (exactly its bytes, as
 * text) and its detached JWS — or the certificate number alone (the hub checks its stored copy).
 */
export const certificateVerifyInput = z.strictObject({
  canonical: z.string().min(2, 'is required').max(900_000, 'is longer than any certificate').optional()
    .describe('The certified JSON exactly as issued (the .json download), as text.'),
  jws: z.string().trim().min(1, 'is required').max(4096, 'is longer than a detached JWS').optional()
    .describe('The detached JWS (the .jws download): header..signature.'),
  number: certificateNumber.optional().describe('Or the certificate number alone: the hub checks the copy it keeps and says whether it stands (valid, corrected, retracted), but not what it certifies: that is for whoever holds the document.'),
}).superRefine((v, ctx) => {
  if (v.number !== undefined) {
    for (const key of ['canonical', 'jws'] as const) if (v[key] !== undefined) ctx.addIssue({ code: 'custom', path: [key], message: 'give the number alone, or canonical and jws without it' })
    return
  }
  for (const key of ['canonical', 'jws'] as const) if (v[key] === undefined) ctx.addIssue({ code: 'custom', path: [key], message: 'is required (or give the certificate number)' })
})
export type CertificateVerifyInput = z.infer<typeof certificateVerifyInput>

export const certificateVerdict = z.object({
  valid: z.boolean().describe('The signature verifies with a key of the hub\'s JWKS over exactly these canonical bytes.'),
  reason: z.enum(['malformed-jws', 'unknown-key', 'signature-mismatch', 'payload-differs', 'not-a-certificate']).nullable().describe('Why it is not valid (null when valid); not-a-certificate: signed by the hub, but not a certificate document.'),
  kid: z.string().nullable(),
  alg: z.string().nullable(),
  canonicalForm: z.boolean().describe('The JSON is in its RFC 8785 canonical form.'),
  issuedByThisHub: z.boolean().describe('The hub holds a certificate with this number and exactly these bytes.'),
  certificate: z.object({ number: z.string(), issuedAt: z.string(), issuer: z.string() }).nullable(),
  certifies: z.object({
    subject: z.enum(certificateSubjects), id: z.string(), lab: z.string(), instrument: z.string(),
    runId: z.string().nullable(), sequenceId: z.string().nullable(), version: z.number().int().nullable(),
    values: z.array(z.string()).describe('The certified values in brief ("δ13C (VPDB) = −1.23 ± 0.05 ‰ (u), k = 2, …").'),
  }).nullable(),
  status: z.object({
    state: z.enum(reviewStates),
    corrected: z.boolean(),
    correctedBy: z.object({ resultId: z.string(), version: z.number().int(), reason: z.string().nullable(), releasedAt: z.string().nullable() }).nullable(),
    retracted: z.boolean(),
    retractedAt: z.string().nullable(),
    retractionReason: z.string().nullable(),
  }).nullable().describe('What the certified result or sequence has become since (null when the hub does not hold it).'),
})
export type CertificateVerdict = z.infer<typeof certificateVerdict>
