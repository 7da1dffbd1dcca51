import type { H3Event } from 'h3'
import ipaddr from 'ipaddr.js'

type Cidr = [ipaddr.IPv4 | ipaddr.IPv6, number]
let parsed: { source: string, cidrs: Cidr[] } | undefined

/** NUXT_TRUSTED_PROXIES: comma-separated CIDRs (or single addresses) of the proxies in front of the hub. */
function trustedProxies(): Cidr[] {
  const source = String(useRuntimeConfig().trustedProxies ?? '')
  if (parsed?.source !== source) {
    const cidrs = source.split(',').map(s => s.trim()).filter(Boolean).map((entry): Cidr => {
      try { return entry.includes('/') ? ipaddr.parseCIDR(entry) : (a => [a, a.kind() === 'ipv4' ? 32 : 128] as Cidr)(ipaddr.parse(entry)) }
      catch { throw new Error(`NUXT_TRUSTED_PROXIES: "${entry}" is not an address or a CIDR`) }
    })
    parsed = { source, cidrs }
  }
  return parsed.cidrs
}

/** An address in its plain form (IPv4-mapped IPv6 as IPv4), or undefined when it is not an address. */
function normalise(address: string | undefined): ipaddr.IPv4 | ipaddr.IPv6 | undefined {
  if (!address || !ipaddr.isValid(address.trim())) return undefined
  return ipaddr.process(address.trim())
}

function isTrusted(address: ipaddr.IPv4 | ipaddr.IPv6): boolean {
  return trustedProxies().some(([range, bits]) => range.kind() === address.kind() && address.match(range, bits))
}

/**
 * The client's address: the socket's peer, unless that peer is a trusted proxy; then
 * X-Forwarded-For is read from the right and the first hop that is not a trusted proxy is
 * the client (hops left of it could have been written by the client itself). Sign-in
 * throttles, the console's change limit, sessions and audit rows all take it from here.
 */
// The socket is read for its peer address and TLS state only, never its body (the lint rule
// on event.node.req is there to keep body reads on the bounded reader).
// eslint-disable-next-line no-restricted-syntax
const socketOf = (event: H3Event) => event.node.req.socket as (typeof event.node.req.socket & { encrypted?: boolean }) | undefined

export function clientAddress(event: H3Event): string {
  const peer = normalise(socketOf(event)?.remoteAddress)
  if (!peer) return 'unknown'
  if (!isTrusted(peer)) return peer.toString()
  const hops = (getRequestHeader(event, 'x-forwarded-for') ?? '').split(',').map(h => h.trim()).filter(Boolean)
  let client = peer
  for (let i = hops.length - 1; i >= 0; i--) {
    const hop = normalise(hops[i])
    // A hop that is not an address was not written by a proxy we trust: stop at the last one we do.
    if (!hop) break
    client = hop
    if (!isTrusted(hop)) break
  }
  return client.toString()
}

/** Whether the request reached the hub over HTTPS: its own TLS, or a trusted proxy's X-Forwarded-Proto. */
export function requestIsHttps(event: H3Event): boolean {
  if (socketOf(event)?.encrypted) return true
  const peer = normalise(socketOf(event)?.remoteAddress)
  if (!peer || !isTrusted(peer)) return false
  // The nearest proxy appends last: read the rightmost value.
  const proto = (getRequestHeader(event, 'x-forwarded-proto') ?? '').split(',').pop()?.trim().toLowerCase()
  return proto === 'https'
}
