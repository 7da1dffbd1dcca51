// Certificates of analysis (issue 20): the canonical JSON of a released result or sequence
// (RFC 8785), its detached JWS signed with the hub's key (RFC 7515 Appendix F), the PDF, and
// the verdict on a certificate someone holds.
export { canonicalJson, isCanonicalJson } from './canonical'
export { issueCertificate, resultCertificate, sequenceCertificate, type Certificate, type CertificateReader } from './issue'
export { certificateDownload, type CertificateFormat } from './downloads'
export { verifyCertificate } from './verify'
