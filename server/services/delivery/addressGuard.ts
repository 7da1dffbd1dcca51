import ipaddr from 'ipaddr.js'

// The address rules of the SSRF guard (outbound.ts applies them with the configured policy).
// Pure: tests/unit/outbound-guard.test.ts imports it as it is.

export class GuardRefusal extends Error {
  code = 'GUARD_REFUSED'
}

/** Hosts ("host" or "host:port") let past the guard, and the ports webhooks may use. */
export interface OutboundPolicy { allowHosts: Set<string>, ports: Set<number> }

/** Why an address may not be reached, or null for a global unicast address. */
export function refusedAddress(address: string): string | null {
  if (!ipaddr.isValid(address)) return 'not an IP address'
  // process() turns IPv4-mapped IPv6 (::ffff:127.0.0.1) into the IPv4 address it carries.
  const parsed = ipaddr.process(address)
  const range = parsed.range()
  // IPv4-compatible IPv6 (::/96 but :: and ::1; deprecated, RFC 4291 §2.5.5.1) is in no range
  // of ipaddr.js, which calls it unicast; a URL spells [::127.0.0.1] so ([::7f00:1]).
  if (range === 'unicast' && parsed.kind() === 'ipv6' && (parsed as ipaddr.IPv6).parts.slice(0, 6).every(p => p === 0)) return `${address} is an IPv4-compatible address`
  return range === 'unicast' ? null : `${address} is a ${range} address`
}

export function isAllowlisted(url: URL, { allowHosts }: OutboundPolicy): boolean {
  const host = url.hostname.toLowerCase()
  const port = url.port || (url.protocol === 'https:' ? '443' : '80')
  return allowHosts.has(host) || allowHosts.has(`${host}:${port}`)
}

/**
 * Checks a webhook URL before it is stored or sent to. WHATWG URL parsing has already
 * normalised IPv4 literals written in decimal, hex, octal or shortened form.
 */
export function checkUrlAgainst(raw: string, policy: OutboundPolicy): URL {
  let url: URL
  try { url = new URL(raw) }
  catch { throw new GuardRefusal('is not a URL') }
  if (url.protocol !== 'http:' && url.protocol !== 'https:') throw new GuardRefusal('must use http or https')
  if (url.username || url.password) throw new GuardRefusal('may not carry a user name or password')
  if (isAllowlisted(url, policy)) return url
  const port = Number(url.port || (url.protocol === 'https:' ? 443 : 80))
  if (!policy.ports.has(port)) throw new GuardRefusal(`port ${port} is not allowed for webhooks`)
  const literal = literalHost(url)
  if (ipaddr.isValid(literal)) {
    const why = refusedAddress(literal)
    if (why) throw new GuardRefusal(`${why}, which webhooks may not reach`)
  }
  if (url.protocol !== 'https:') throw new GuardRefusal('must use https (plain http is only for hosts the hub\'s operator allowlisted)')
  return url
}

export const literalHost = (url: URL) => url.hostname.replace(/^\[(.*)\]$/, '$1')

