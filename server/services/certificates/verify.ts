import { eq } from 'drizzle-orm'
import { base64url, flattenedVerify, importJWK, type JWK } from 'jose'
import type { CertificateVerdict, CertificateVerifyInput } from '#shared/schemas/certificates'
import { certificates, signingKeys } from '../../database/schema'
import { isCanonicalJson } from './canonical'
import { subjectState, type CertificateDocument } from './document'
import { describeValue } from './pdf'

// Checking a certificate: the signature over exactly the given bytes with a key of the hub's
// JWKS, then what the hub knows of it (its stored copy, and what became of what it certifies).

type Check = Pick<CertificateVerdict, 'valid' | 'reason' | 'kid' | 'alg'>

/** The detached JWS's signature over `canonical`, with the hub's key named by its `kid`. */
export async function checkSignature(canonical: string, jws: string): Promise<Check> {
  const parts = jws.trim().split('.')
  const refused = (reason: CertificateVerdict['reason'], kid: string | null = null, alg: string | null = null): Check => ({ valid: false, reason, kid, alg })
  if (parts.length !== 3 || !parts[0] || !parts[2]) return refused('malformed-jws')
  const payload = base64url.encode(new TextEncoder().encode(canonical))
  let header: { kid?: unknown, alg?: unknown }
  try { header = JSON.parse(new TextDecoder().decode(base64url.decode(parts[0]))) as typeof header }
  catch { return refused('malformed-jws') }
  const kid = typeof header.kid === 'string' ? header.kid : null
  const alg = typeof header.alg === 'string' ? header.alg : null
  // An attached payload (the compact form with its middle part) must be these very bytes.
  if (parts[1] && parts[1] !== payload) return refused('payload-differs', kid, alg)
  const [key] = kid ? await useDb().select().from(signingKeys).where(eq(signingKeys.kid, kid)).limit(1) : []
  if (!key) return refused('unknown-key', kid, alg)
  try {
    await flattenedVerify({ protected: parts[0], payload, signature: parts[2] }, await importJWK(key.publicJwk as JWK, key.alg), { algorithms: [key.alg] })
    return { valid: true, reason: null, kid, alg }
  }
  catch { return refused('signature-mismatch', kid, alg) }
}

function parseDocument(canonical: string): CertificateDocument | undefined {
  try {
    const doc = JSON.parse(canonical) as CertificateDocument
    return doc && typeof doc === 'object' && typeof doc.certificate?.number === 'string' && (doc.subject?.type === 'result' || doc.subject?.type === 'sequence') ? doc : undefined
  }
  catch { return undefined }
}

function briefValues(doc: CertificateDocument): string[] {
  if (doc.subject.type === 'result' && 'acquisition' in doc) return doc.values.ratios.map(r => `${r.delta.name} (${r.delta.scale}) = ${describeValue(r.delta)}`)
  if ('sequence' in doc) return doc.values.samples.flatMap(s => s.values.map(v => `position ${s.position} (${s.runId}): ${v.quantity} (${v.scale}) = ${describeValue(v)}`))
  return []
}

/** The verdict on a certificate given as its two files, or by its number (the hub's stored copy). */
export async function verifyCertificate(input: CertificateVerifyInput): Promise<CertificateVerdict> {
  let canonical: string
  let jws: string
  if (input.number) {
    const stored = await useDb().query.certificates.findFirst({ where: eq(certificates.number, input.number) })
    if (!stored) throw problem(404, 'certificate-not-found', `The hub has issued no certificate ${input.number}.`)
    canonical = stored.canonical
    jws = stored.jws
  }
  else {
    canonical = input.canonical!
    jws = input.jws!
  }
  const signature = await checkSignature(canonical, jws)
  const doc = parseDocument(canonical)
  // The hub's key also signs partners' access tokens: a valid signature over something that is
  // not a certificate document is not a valid certificate.
  const check: Check = signature.valid && !doc ? { ...signature, valid: false, reason: 'not-a-certificate' } : signature
  const stored = doc ? await useDb().query.certificates.findFirst({ where: eq(certificates.number, doc.certificate.number) }) : undefined
  const issuedByThisHub = !!stored && stored.canonical === canonical
  const state = issuedByThisHub ? await subjectState(stored.subject, stored.subjectId) : undefined
  // By number alone the caller shows no copy of the certificate, so the answer says only
  // whether it stands: what it certifies (lab, run, values) and any reasons stay with those
  // who hold the document. Numbers run in order; anyone could otherwise read every lab's values.
  const byNumber = !!input.number
  return {
    ...check,
    canonicalForm: isCanonicalJson(canonical),
    issuedByThisHub,
    certificate: doc ? { number: doc.certificate.number, issuedAt: String(doc.certificate.issuedAt), issuer: String(doc.certificate.issuer) } : null,
    certifies: doc && !byNumber
      ? {
          subject: doc.subject.type, id: doc.subject.id, lab: String(doc.lab?.name ?? ''), instrument: String(doc.instrument?.name ?? ''),
          runId: doc.subject.type === 'result' && 'acquisition' in doc ? doc.acquisition.runId : null,
          sequenceId: doc.subject.type === 'sequence' ? doc.subject.sequenceId : null,
          version: doc.subject.type === 'result' ? doc.subject.version : null,
          values: (() => { try { return briefValues(doc) } catch { return [] } })(),
        }
      : null,
    status: state
      ? {
          state: state.reviewState, corrected: !!state.correctedBy, correctedBy: state.correctedBy && byNumber ? { ...state.correctedBy, reason: null } : state.correctedBy,
          retracted: state.reviewState === 'retracted', retractedAt: state.retractedAt?.toISOString() ?? null, retractionReason: byNumber ? null : state.retractionReason,
        }
      : null,
  }
}
