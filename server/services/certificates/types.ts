// The shape of a certificate's document (what is signed): plain types, shared by the
// document builder, the PDF writer and the tests.

export const CERTIFICATE_FORMAT = 'arcwise-certificate/1'

/** A value with its standard uncertainty u, the coverage factor k and the expanded U = k·u (GUM 6.2.1). */
export interface CertifiedValue { value: number, u: number | null, k: number, U: number | null, unit: string }

export interface CertificateHead { number: string, issuedAt: string, issuer: string }
export interface Review { state: string, releasedAt: string | null, reviewedBy: string | null, version: number, supersedes: string | null, correctionReason: string | null }
export interface Versions { geometry: number[], calibration: number[], method: { name: string, version: number } | null, engine: string[], constants: string[] }

export interface ResultCertificateDocument {
  format: typeof CERTIFICATE_FORMAT
  certificate: CertificateHead
  subject: { type: 'result', id: string, acquisitionId: string, version: number }
  lab: { slug: string, name: string, site: string }
  instrument: { slug: string, name: string }
  acquisition: { runId: string, acquiredAt: string, sampleRef: string | null }
  versions: Versions
  calibrated: boolean
  review: Review
  values: {
    ratios: { id: string, numerator: string, denominator: string, ratio: CertifiedValue, delta: CertifiedValue & { name: string, scale: string, uWithReference: number } }[]
    peaks: { species: string | null, z: number | null, mz: CertifiedValue, area: CertifiedValue }[]
  }
  qc: { code: string, message: string }[]
  caution: { short: string, text: string }
}

export interface SequenceCertificateDocument {
  format: typeof CERTIFICATE_FORMAT
  certificate: CertificateHead
  subject: { type: 'sequence', id: string, sequenceId: string }
  lab: { slug: string, name: string, site: string }
  instrument: { slug: string, name: string }
  sequence: { gas: string, acquisitions: number, processedAt: string | null, accepted: boolean }
  versions: Versions
  calibrated: boolean
  review: Review
  values: {
    samples: { position: number, runId: string, sampleRef: string | null, values: (CertifiedValue & { quantity: string, scale: string })[] }[]
    normalisation: { quantity: string, scale: string, slope: CertifiedValue, intercept: CertifiedValue, anchors: string[] }[]
  }
  qc: { code: string, message: string }[]
  caution: { short: string, text: string }
}

export type CertificateDocument = ResultCertificateDocument | SequenceCertificateDocument
