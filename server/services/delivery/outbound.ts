import { lookup as dnsLookup, promises as dns, type LookupAddress } from 'node:dns'
import { EventEmitter } from 'node:events'
import ipaddr from 'ipaddr.js'
import { Agent, request } from 'undici'
import { checkUrlAgainst, GuardRefusal, isAllowlisted as isAllowlistedBy, literalHost, refusedAddress, type OutboundPolicy } from './addressGuard'

// Outbound HTTP for webhooks, behind a guard against server-side request forgery: only
// http(s), allowed ports, no credentials in the URL, and every address the request would
// reach must be global unicast (ipaddr.js `range()` is 'unicast'), whether the URL names an
// IP literal in any spelling or a host name (checked after DNS resolution, so a name that
// resolves to 127.0.0.1 is refused as well). Outside the configured allowlist, the only way
// past it, webhooks use https: a signed result sent in clear text is readable on the way.

let parsed: OutboundPolicy | undefined
function settings(): OutboundPolicy {
  if (parsed) return parsed
  const { webhooks } = useRuntimeConfig()
  const list = (v: unknown) => String(v ?? '').split(',').map(s => s.trim().toLowerCase()).filter(Boolean)
  return (parsed = { allowHosts: new Set(list(webhooks.allowHosts)), ports: new Set(list(webhooks.allowedPorts).map(Number)) })
}

const isAllowlisted = (url: URL) => isAllowlistedBy(url, settings())

/** Checks a webhook URL before it is stored or sent to (checkUrlAgainst, with the configured allowlist and ports). */
export function checkOutboundUrl(raw: string): URL {
  return checkUrlAgainst(raw, settings())
}

/** Why a name may not be reached, from the addresses it resolves to, or null when all are global unicast. */
function refusedResolution(hostname: string, addresses: LookupAddress[]): string | null {
  const bad = addresses.map(a => refusedAddress(a.address)).find(Boolean)
  return bad ? `${hostname} resolves to ${bad}, which webhooks may not reach` : null
}

/** How long saving an endpoint waits for DNS before leaving the name to the check at send. */
const SAVE_LOOKUP_MS = 3000

/**
 * checkOutboundUrl, and for a host name also its addresses now, so that an endpoint naming
 * an internal host is refused when it is saved rather than at its first delivery. A name
 * that does not resolve yet (or not in time) is kept: the same check runs again at each send,
 * which is what stops a name that changes its addresses later.
 */
export async function checkOutboundUrlResolved(raw: string): Promise<URL> {
  const url = checkOutboundUrl(raw)
  if (isAllowlisted(url) || ipaddr.isValid(literalHost(url))) return url
  let timer: NodeJS.Timeout | undefined
  const addresses = await Promise.race([
    dns.lookup(url.hostname, { all: true, verbatim: true }).catch(() => []),
    new Promise<LookupAddress[]>((resolve) => { timer = setTimeout(() => resolve([]), SAVE_LOOKUP_MS) }),
  ]).finally(() => clearTimeout(timer))
  const why = refusedResolution(url.hostname, addresses)
  if (why) throw new GuardRefusal(why)
  return url
}

type LookupCallback = (err: NodeJS.ErrnoException | null, address: string | LookupAddress[], family?: number) => void

/** dns.lookup that refuses a name when any address it resolves to is not global unicast. */
function guardedLookup(hostname: string, options: { all?: boolean }, callback: LookupCallback) {
  dnsLookup(hostname, { ...options, all: true }, (err, addresses) => {
    if (err) return callback(err, [])
    const list = addresses as LookupAddress[]
    const why = refusedResolution(hostname, list)
    if (why) return callback(new GuardRefusal(why), [])
    if (options.all) return callback(null, list)
    callback(null, list[0]!.address, list[0]!.family)
  })
}

let guardedAgent: Agent | undefined
let openAgent: Agent | undefined
// No cap on connections per origin: the claim bounds each endpoint's sends in flight, and a
// pool cap per host made a slow endpoint's hanging sends hold up every other endpoint on the
// same host (one partner's paths, or the benchmark's receivers on one port).
function agentFor(url: URL): Agent {
  if (isAllowlisted(url)) return (openAgent ??= new Agent())
  return (guardedAgent ??= new Agent({ connect: { lookup: guardedLookup as never } }))
}

export interface OutboundResponse { statusCode: number, headers: Record<string, string>, excerpt: string }

/**
 * POSTs `body` to a checked URL: no redirects followed, `timeoutMs` for the whole exchange,
 * and at most `excerptBytes` of the answer read (the rest is dropped unread).
 */
export async function postGuarded(rawUrl: string, headers: Record<string, string>, body: string | Buffer, opts: { timeoutMs: number, excerptBytes?: number }): Promise<OutboundResponse> {
  const url = checkOutboundUrl(rawUrl)
  // The deadline of the whole exchange, given to undici as an EventEmitter signal (it aborts
  // with an AbortError): AbortSignal.timeout cost more per request in a microbenchmark
  // beside bench:delivery (DEVELOPERS.md, Measured).
  const deadline = new EventEmitter()
  const timer = setTimeout(() => deadline.emit('abort'), opts.timeoutMs)
  try {
    const res = await request(url, {
      method: 'POST', headers, body, dispatcher: agentFor(url),
      headersTimeout: opts.timeoutMs, bodyTimeout: opts.timeoutMs, signal: deadline,
    })
    const cap = opts.excerptBytes ?? 2048
    const chunks: Buffer[] = []
    let seen = 0
    for await (const chunk of res.body) {
      chunks.push(chunk as Buffer)
      seen += (chunk as Buffer).length
      if (seen >= cap) break
    }
    if (seen >= cap) res.body.destroy()
    const flat: Record<string, string> = {}
    for (const [k, v] of Object.entries(res.headers)) if (v !== undefined) flat[k] = Array.isArray(v) ? v.join(', ') : v
    return { statusCode: res.statusCode, headers: flat, excerpt: Buffer.concat(chunks).subarray(0, cap).toString('utf8') }
  }
  finally {
    clearTimeout(timer)
  }
}
