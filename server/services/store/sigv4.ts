import { createHash, createHmac } from 'node:crypto'

// AWS Signature Version 4 for one request with its payload's SHA-256 known, as S3 and every
// S3-compatible store check it (AWS, "Signature Version 4 signing process" and the S3 API
// Reference, "Signature Calculations for the Authorization Header: Transferring Payload in a
// Single Chunk"). Pure: no I/O. The lean PUT (./leanPut.ts) signs with it instead of running
// the SDK's middleware stack for each small object; tests/unit/store-sigv4.test.ts checks it
// against the AWS documentation's published example and against the SDK's own signer.

export interface SigningCredentials { accessKeyId: string, secretAccessKey: string, sessionToken?: string }

export interface SignInput {
  method: string
  url: URL
  /** Header names in lower case; host, x-amz-date and x-amz-content-sha256 are added. */
  headers: Record<string, string>
  /** Hex SHA-256 of the body, or UNSIGNED-PAYLOAD. */
  payloadSha256: string
  credentials: SigningCredentials
  region: string
  service: string
  date: Date
}

const hmac = (key: Buffer | string, data: string) => createHmac('sha256', key).update(data, 'utf8').digest()
const hexSha256 = (data: string) => createHash('sha256').update(data, 'utf8').digest('hex')

// RFC 3986 unreserved characters stay; everything else is %XX in upper case (the S3 API
// Reference, "URI encode every byte"). In a path, "/" stays as it is; S3 encodes once.
function uriEncode(s: string, keepSlash: boolean): string {
  const encoded = encodeURIComponent(s).replace(/[!'()*]/g, c => `%${c.charCodeAt(0).toString(16).toUpperCase()}`)
  return keepSlash ? encoded.replace(/%2F/g, '/') : encoded
}

// The signing key depends only on the secret, the day, the region and the service: kept per
// day, so that a request costs two HMACs and two hashes rather than six.
const keyCache = new Map<string, Buffer>()
function signingKey(secret: string, day: string, region: string, service: string): Buffer {
  const id = `${secret}\n${day}\n${region}\n${service}`
  let key = keyCache.get(id)
  if (!key) {
    if (keyCache.size > 16) keyCache.clear()
    key = hmac(hmac(hmac(hmac(`AWS4${secret}`, day), region), service), 'aws4_request')
    keyCache.set(id, key)
  }
  return key
}

/** `x-amz-date`'s form: 20130524T000000Z. */
export const amzDate = (date: Date) => date.toISOString().replace(/[:-]|\.\d{3}/g, '')

/** The request's headers with x-amz-date, x-amz-content-sha256, the session token and Authorization added. */
export function signRequest(input: SignInput): Record<string, string> {
  const stamp = amzDate(input.date)
  const day = stamp.slice(0, 8)
  const headers: Record<string, string> = {
    ...input.headers,
    'host': input.url.host,
    'x-amz-content-sha256': input.payloadSha256,
    'x-amz-date': stamp,
    ...(input.credentials.sessionToken ? { 'x-amz-security-token': input.credentials.sessionToken } : {}),
  }
  const names = Object.keys(headers).map(n => n.toLowerCase()).sort()
  const lower = Object.fromEntries(Object.entries(headers).map(([k, v]) => [k.toLowerCase(), v]))
  const canonicalHeaders = names.map(n => `${n}:${String(lower[n]).trim().replace(/\s+/g, ' ')}\n`).join('')
  const signedHeaders = names.join(';')
  const query = [...input.url.searchParams].map(([k, v]) => [uriEncode(k, false), uriEncode(v, false)] as const)
    .sort(([a, x], [b, y]) => a < b ? -1 : a > b ? 1 : x < y ? -1 : x > y ? 1 : 0)
    .map(([k, v]) => `${k}=${v}`).join('&')
  const path = uriEncode(decodeURIComponent(input.url.pathname), true) || '/'
  const canonicalRequest = [input.method, path, query, canonicalHeaders, signedHeaders, input.payloadSha256].join('\n')
  const scope = `${day}/${input.region}/${input.service}/aws4_request`
  const stringToSign = ['AWS4-HMAC-SHA256', stamp, scope, hexSha256(canonicalRequest)].join('\n')
  const signature = createHmac('sha256', signingKey(input.credentials.secretAccessKey, day, input.region, input.service)).update(stringToSign, 'utf8').digest('hex')
  headers.authorization = `AWS4-HMAC-SHA256 Credential=${input.credentials.accessKeyId}/${scope}, SignedHeaders=${signedHeaders}, Signature=${signature}`
  return headers
}
