import { Agent, request } from 'undici'
import type { S3Client } from '@aws-sdk/client-s3'
import type { SignatureV4 } from '@smithy/signature-v4'
import { requestSigner, signRequest } from './sigv4'

// One PUT of a small object, signed by the SDK's own signer (./sigv4.ts) and sent over a
// keep-alive undici connection pool, instead of through the SDK's middleware stack. Every acquisition stores
// two objects of tens of kilobytes; the SDK spent 0.6–2 ms of CPU on each (endpoint
// resolution, copies of the client's configuration, a CRC32 of the body and a second SHA-256
// for the signature), about as much as the engine and the database write of the acquisition
// together (DEVELOPERS.md, Measured). Everything that decides where and how to send comes from
// the SDK client itself, resolved once: its endpoint rules (path-style or virtual-hosted, any
// endpoint, AWS regions), its signing region and name, its credentials provider (static keys,
// environment, instance roles, with session tokens) and its clock-skew correction. So the
// settings are those of the client (./client.ts), and big objects still go through lib-storage.

/** The largest object sent this way (larger: lib-storage's Upload, multipart beyond 5 MB). */
export const LEAN_PUT_MAX_BYTES = 5 * 1024 * 1024

interface Target { base: string, signer: SignatureV4 }

/** The store answered with an S3 error (its Code as the name), or a status without one. */
export class StoreResponseError extends Error {
  constructor(readonly status: number, code: string, message: string) {
    super(message)
    this.name = code
  }
}

// As the SDK client is configured (./client.ts: maxAttempts 2, connectionTimeout 2 s,
// requestTimeout 60 s): a store that is down fails an upload within seconds.
const ATTEMPTS = 2
let agent: Agent | undefined
const targets = new WeakMap<S3Client, Promise<Target | null>>()

/**
 * Where the SDK would send a request for this bucket, and how it would sign it; null when
 * its endpoint rules ask for another scheme than SigV4 (S3 Express directory buckets use
 * session tokens of their own, multi-region access points SigV4a): those keep the SDK path.
 */
function target(s3: S3Client, bucket: string): Promise<Target | null> {
  let found = targets.get(s3)
  if (!found) {
    found = (async () => {
      const c = s3.config
      const endpoint = c.endpoint ? await c.endpoint() : undefined
      const resolved = c.endpointProvider({
        Bucket: bucket, Region: await c.region(), UseFIPS: await c.useFipsEndpoint(), UseDualStack: await c.useDualstackEndpoint(),
        ForcePathStyle: c.forcePathStyle, Accelerate: c.useAccelerateEndpoint,
        UseGlobalEndpoint: typeof c.useGlobalEndpoint === 'function' ? await c.useGlobalEndpoint() : c.useGlobalEndpoint,
        DisableMultiRegionAccessPoints: c.disableMultiregionAccessPoints, UseArnRegion: false,
        Endpoint: endpoint ? `${endpoint.protocol}//${endpoint.hostname}${endpoint.port ? `:${endpoint.port}` : ''}${endpoint.path}` : undefined,
      })
      const scheme = (resolved.properties?.authSchemes as { name?: string, signingName?: string, signingRegion?: string }[] | undefined)?.[0]
      if (!scheme || scheme.name !== 'sigv4') return null
      const href = resolved.url.href
      const signer = requestSigner({ credentials: c.credentials, region: scheme.signingRegion ?? await c.region(), service: scheme.signingName ?? 's3', sha256: c.sha256 })
      return { base: href.endsWith('/') ? href : `${href}/`, signer }
    })()
    targets.set(s3, found)
  }
  return found
}

/** Whether this client's objects can be put the lean way (else the SDK's). */
export async function leanPutAvailable(s3: S3Client, bucket: string): Promise<boolean> {
  return (await target(s3, bucket)) !== null
}

const errorPart = (xml: string, tag: string) => new RegExp(`<${tag}>([^<]{0,500})</${tag}>`).exec(xml)?.[1]

const retryable = (error: unknown) => !(error instanceof StoreResponseError) || error.status >= 500 || error.status === 429

/**
 * PUTs `data` at `key`, its SHA-256 (hex) known: signed as the payload's hash, and sent as
 * `x-amz-checksum-sha256` too, so the store refuses bytes that do not match the content
 * address. Retried once on a network error, a 5xx or a 429, as the SDK client would. Throws
 * the network error or a StoreResponseError; the caller turns either into the 503.
 */
export async function leanPut(s3: S3Client, bucket: string, key: string, data: Buffer, sha256: string, contentType: string, metadata: Record<string, string>): Promise<void> {
  const where = await target(s3, bucket)
  if (!where) throw new Error('the store\'s endpoint asks for another signing scheme than SigV4')
  agent ??= new Agent({ connect: { timeout: 2000 }, headersTimeout: 60_000, bodyTimeout: 60_000, keepAliveTimeout: 4000 })
  const url = new URL(key, where.base)
  const headers: Record<string, string> = {
    'content-type': contentType,
    'content-length': String(data.length),
    'x-amz-checksum-sha256': Buffer.from(sha256, 'hex').toString('base64'),
    ...Object.fromEntries(Object.entries(metadata).map(([k, v]) => [`x-amz-meta-${k.toLowerCase()}`, v])),
  }
  let lastError: unknown
  for (let attempt = 1; attempt <= ATTEMPTS; attempt++) {
    try {
      const signed = await signRequest(where.signer, { method: 'PUT', url, headers, payloadSha256: sha256, date: new Date(Date.now() + (s3.config.systemClockOffset ?? 0)) })
      const res = await request(url, { method: 'PUT', headers: signed, body: data, dispatcher: agent })
      if (res.statusCode >= 200 && res.statusCode < 300) {
        await res.body.dump()
        return
      }
      const text = await res.body.text()
      throw new StoreResponseError(res.statusCode, errorPart(text, 'Code') ?? `HTTP${res.statusCode}`, errorPart(text, 'Message') ?? `the store answered ${res.statusCode}`)
    }
    catch (error) {
      lastError = error
      if (!retryable(error) || attempt === ATTEMPTS) break
      // The SDK's standard retry waits a random part of 100 ms before its second attempt.
      await new Promise(resolve => setTimeout(resolve, Math.random() * 100))
    }
  }
  throw lastError
}

/** Closes the pool's sockets (with the SDK client, ./client.ts closeStore). */
export function closeLeanPut() {
  const closing = agent
  agent = undefined
  void closing?.close()
}
