import { lookup as dnsLookup, type LookupAddress } from 'node:dns'
import { EventEmitter } from 'node:events'
import ipaddr from 'ipaddr.js'
import { Agent, request } from 'undici'

// Outbound HTTP for webhooks, behind a guard against server-side request forgery: only
// http(s), allowed ports, no credentials in the URL, and every address the request would
// reach must be global unicast (ipaddr.js `range()` is 'unicast'), whether the URL names an
// IP literal in any spelling or a host name (checked after DNS resolution, so a name that
// resolves to 127.0.0.1 is refused as well). A configured allowlist is the only way past it.

export class GuardRefusal extends Error {
  code = 'GUARD_REFUSED'
}

let parsed: { allowHosts: Set<string>, ports: Set<number> } | undefined
function settings() {
  if (parsed) return parsed
  const { webhooks } = useRuntimeConfig()
  const list = (v: unknown) => String(v ?? '').split(',').map(s => s.trim().toLowerCase()).filter(Boolean)
  return (parsed = { allowHosts: new Set(list(webhooks.allowHosts)), ports: new Set(list(webhooks.allowedPorts).map(Number)) })
}

/** Why an address may not be reached, or null for a global unicast address. */
export function refusedAddress(address: string): string | null {
  if (!ipaddr.isValid(address)) return 'not an IP address'
  // process() turns IPv4-mapped IPv6 (::ffff:127.0.0.1) into the IPv4 address it carries.
  const range = ipaddr.process(address).range()
  return range === 'unicast' ? null : `${address} is a ${range} address`
}

function isAllowlisted(url: URL): boolean {
  const { allowHosts } = settings()
  const host = url.hostname.toLowerCase()
  const port = url.port || (url.protocol === 'https:' ? '443' : '80')
  return allowHosts.has(host) || allowHosts.has(`${host}:${port}`)
}

/**
 * Checks a webhook URL before it is stored or sent to. WHATWG URL parsing has already
 * normalised IPv4 literals written in decimal, hex, octal or shortened form.
 */
export function checkOutboundUrl(raw: string): URL {
  let url: URL
  try { url = new URL(raw) }
  catch { throw new GuardRefusal('is not a URL') }
  if (url.protocol !== 'http:' && url.protocol !== 'https:') throw new GuardRefusal('must use http or https')
  if (url.username || url.password) throw new GuardRefusal('may not carry a user name or password')
  if (isAllowlisted(url)) return url
  const port = Number(url.port || (url.protocol === 'https:' ? 443 : 80))
  if (!settings().ports.has(port)) throw new GuardRefusal(`port ${port} is not allowed for webhooks`)
  const literal = url.hostname.replace(/^\[(.*)\]$/, '$1')
  if (ipaddr.isValid(literal)) {
    const why = refusedAddress(literal)
    if (why) throw new GuardRefusal(`${why}, which webhooks may not reach`)
  }
  return url
}

type LookupCallback = (err: NodeJS.ErrnoException | null, address: string | LookupAddress[], family?: number) => void

/** dns.lookup that refuses a name when any address it resolves to is not global unicast. */
function guardedLookup(hostname: string, options: { all?: boolean }, callback: LookupCallback) {
  dnsLookup(hostname, { ...options, all: true }, (err, addresses) => {
    if (err) return callback(err, [])
    const list = addresses as LookupAddress[]
    const bad = list.map(a => refusedAddress(a.address)).find(Boolean)
    if (bad) return callback(new GuardRefusal(`${hostname} resolves to ${bad}, which webhooks may not reach`), [])
    if (options.all) return callback(null, list)
    callback(null, list[0]!.address, list[0]!.family)
  })
}

let guardedAgent: Agent | undefined
let openAgent: Agent | undefined
function agentFor(url: URL): Agent {
  if (isAllowlisted(url)) return (openAgent ??= new Agent({ connections: 64 }))
  return (guardedAgent ??= new Agent({ connections: 64, connect: { lookup: guardedLookup as never } }))
}

export interface OutboundResponse { statusCode: number, headers: Record<string, string>, excerpt: string }

/**
 * POSTs `body` to a checked URL: no redirects followed, `timeoutMs` for the whole exchange,
 * and at most `excerptBytes` of the answer read (the rest is dropped unread).
 */
export async function postGuarded(rawUrl: string, headers: Record<string, string>, body: string | Buffer, opts: { timeoutMs: number, excerptBytes?: number }): Promise<OutboundResponse> {
  const url = checkOutboundUrl(rawUrl)
  // The deadline of the whole exchange, given to undici as an EventEmitter signal (it aborts
  // with an AbortError): AbortSignal.timeout cost about 25 µs more per request, a sixth of
  // the send path in a microbenchmark beside bench:delivery.
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
