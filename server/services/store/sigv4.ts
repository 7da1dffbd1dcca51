import { SignatureV4 } from '@smithy/signature-v4'

// AWS Signature Version 4 for the lean PUT (./leanPut.ts), by the SDK's own signer
// (@smithy/signature-v4, the one @aws-sdk/client-s3 signs every request with; the version
// package.json pins is the one the client depends on). The payload's SHA-256 is known (the
// object's content address) and passed as x-amz-content-sha256, which the signer takes as
// the payload hash instead of hashing the body again (AWS, Amazon S3 API Reference,
// "Signature Calculations for the Authorization Header: Transferring Payload in a Single
// Chunk"). An own signer was tried and measured 4–10 µs a request faster (17.6–37.3 vs
// 21.9–48.1 µs, 20,000 signatures, three rounds, 2026-12-04): two signatures an acquisition
// against about 8 ms of ingest, so the package is kept. tests/unit/store-sigv4.test.ts
// checks this wrapper against the AWS documentation's published example.

/** The signer's own settings (credentials or their provider, region, service, sha256). */
export type SignerSettings = Omit<ConstructorParameters<typeof SignatureV4>[0], 'uriEscapePath'>

/** A signer for one client's requests: the signing key is cached per day inside it. */
export function requestSigner(settings: SignerSettings): SignatureV4 {
  // S3 signs the path as sent (the key's segments percent-encoded once), not encoded again.
  return new SignatureV4({ ...settings, uriEscapePath: false })
}

export interface SignInput {
  method: string
  url: URL
  /** Header names in lower case; host and x-amz-content-sha256 are added, x-amz-date by the signer. */
  headers: Record<string, string>
  /** Hex SHA-256 of the body, or UNSIGNED-PAYLOAD. */
  payloadSha256: string
  date: Date
}

/** The request's headers with host, x-amz-date, x-amz-content-sha256, any session token and Authorization. */
export async function signRequest(signer: SignatureV4, input: SignInput): Promise<Record<string, string>> {
  const { url } = input
  const signed = await signer.sign({
    method: input.method, protocol: url.protocol, hostname: url.hostname,
    port: url.port ? Number(url.port) : undefined, path: url.pathname,
    query: Object.fromEntries(url.searchParams),
    headers: { ...input.headers, 'host': url.host, 'x-amz-content-sha256': input.payloadSha256 },
  }, { signingDate: input.date })
  return signed.headers
}
