import type { CertificateDocument } from './document'
import { subjectState } from './document'
import { certificateFonts } from './fonts'
import type { Certificate } from './issue'
import { sha256Hex } from './issue'
import { certificatePdf } from './pdf'

// A certificate as the files a holder keeps: the PDF to read, the canonical JSON and its
// detached JWS to verify (the JSON exactly as signed, byte for byte).

const formats = {
  pdf: 'application/pdf',
  json: 'application/json; charset=utf-8',
  // RFC 7515 §9.2.1: the compact serialisation's media type.
  jws: 'application/jose',
} as const
export type CertificateFormat = keyof typeof formats

/** One of a certificate's files, with its type and attachment name (the certificate number). */
export async function certificateDownload(cert: Certificate, format: CertificateFormat): Promise<{ contentType: string, disposition: string, body: string | Buffer }> {
  const disposition = `attachment; filename="${cert.number}.${format}"`
  if (format === 'json') return { contentType: formats.json, disposition, body: cert.canonical }
  if (format === 'jws') return { contentType: formats.jws, disposition, body: cert.jws }
  const doc = JSON.parse(cert.canonical) as CertificateDocument
  const state = await subjectState(cert.subject, cert.subjectId)
  const header = JSON.parse(Buffer.from(cert.jws.split('.')[0]!, 'base64url').toString()) as { alg?: string }
  const appUrl = useRuntimeConfig().appUrl
  const base = appUrl.endsWith('/') ? appUrl.slice(0, -1) : appUrl
  const body = await certificatePdf(doc, {
    kid: cert.kid, alg: header.alg ?? 'ES256', sha256: sha256Hex(cert.canonical),
    jwksUrl: `${base}/.well-known/jwks.json`, verifyUrl: `${base}/console/certificates/verify`,
  }, {
    retracted: state?.reviewState === 'retracted' ? { at: state.retractedAt?.toISOString() ?? null, reason: state.retractionReason } : null,
    correctedBy: state?.correctedBy ?? null,
  }, await certificateFonts(), { canonical: cert.canonical, jws: cert.jws })
  return { contentType: formats.pdf, disposition, body }
}
