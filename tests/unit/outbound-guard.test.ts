import { describe, expect, it } from 'vitest'
import { checkUrlAgainst, GuardRefusal, refusedAddress, type OutboundPolicy } from '../../server/services/delivery/addressGuard'

// The SSRF guard of outbound webhooks: every address that is not global unicast is refused,
// whichever way the URL spells it. Ranges: IANA IPv4 and IPv6 Special-Purpose Address
// Registries (RFC 6890 and its updates), as ipaddr.js 2.5 tables them.

const policy: OutboundPolicy = { allowHosts: new Set(['127.0.0.1:4100']), ports: new Set([80, 443]) }

describe('refusedAddress: each class of address that is not global unicast', () => {
  it.each([
    ['0.0.0.0', 'unspecified'],
    ['0.1.2.3', 'unspecified'],
    ['255.255.255.255', 'broadcast'],
    ['224.0.0.251', 'multicast'],
    ['239.255.255.250', 'multicast'],
    ['169.254.169.254', 'linkLocal'],
    ['127.0.0.1', 'loopback'],
    ['127.255.255.254', 'loopback'],
    ['100.64.0.1', 'carrierGradeNat'],
    ['100.127.255.254', 'carrierGradeNat'],
    ['10.0.0.1', 'private'],
    ['172.16.0.1', 'private'],
    ['172.31.255.254', 'private'],
    ['192.168.1.1', 'private'],
    ['192.0.0.8', 'reserved'],
    ['192.0.2.1', 'reserved'],
    ['198.18.0.1', 'reserved'],
    ['198.51.100.7', 'reserved'],
    ['203.0.113.9', 'reserved'],
    ['240.0.0.1', 'reserved'],
    ['192.175.48.1', 'as112'],
    ['192.52.193.1', 'amt'],
  ])('IPv4 %s is refused as %s', (address, range) => {
    expect(refusedAddress(address)).toBe(`${address} is a ${range} address`)
  })

  it.each([
    ['::', 'unspecified'],
    ['::1', 'loopback'],
    ['fe80::1', 'linkLocal'],
    ['ff02::1', 'multicast'],
    ['fc00::1', 'uniqueLocal'],
    ['fd12:3456::1', 'uniqueLocal'],
    ['fec0::1', 'deprecatedSiteLocal'],
    ['100::1', 'discard'],
    ['64:ff9b::a00:1', 'rfc6052'], // NAT64 well-known prefix (RFC 6052)
    ['64:ff9b:1::1', 'rfc6052'], // NAT64 local-use prefix (RFC 8215)
    ['::ffff:0:7f00:1', 'rfc6145'], // IPv4-translated (RFC 6145)
    ['2002:7f00:1::1', '6to4'],
    ['2001::1', 'teredo'],
    ['2001:2::1', 'benchmarking'],
    ['2001:db8::1', 'reserved'], // documentation (RFC 3849)
    ['2001:10::1', 'deprecatedOrchid'],
    ['2001:20::1', 'orchid2'],
    ['5f00::1', 'segmentRouting'],
  ])('IPv6 %s is refused as %s', (address, range) => {
    expect(refusedAddress(address)).toBe(`${address} is a ${range} address`)
  })

  it.each([
    ['::ffff:127.0.0.1', 'loopback'],
    ['::ffff:7f00:1', 'loopback'],
    ['::ffff:10.1.2.3', 'private'],
    ['::ffff:a9fe:a9fe', 'linkLocal'],
  ])('IPv4-mapped IPv6 %s is judged as the IPv4 address it carries (%s)', (address, range) => {
    expect(refusedAddress(address)).toMatch(new RegExp(` is a ${range} address$`))
  })

  it.each(['::7f00:1', '::a00:1', '::808:808'])('IPv4-compatible IPv6 %s (deprecated, RFC 4291 §2.5.5.1; ipaddr.js calls it unicast) is refused', (address) => {
    expect(refusedAddress(address)).toBe(`${address} is an IPv4-compatible address`)
  })

  it('refuses ::127.0.0.1 too (ipaddr.js reads the dotted form as the IPv4 address)', () => {
    expect(refusedAddress('::127.0.0.1')).toBe('::127.0.0.1 is a loopback address')
  })

  it.each(['93.184.215.14', '8.8.8.8', '2606:4700:4700::1111', '2a00:1450:4001:80b::200e'])('global unicast %s passes', (address) => {
    expect(refusedAddress(address)).toBeNull()
  })

  it('refuses what is not an address', () => {
    expect(refusedAddress('example.com')).toBe('not an IP address')
  })
})

describe('checkUrlAgainst: IP literals in every spelling a URL allows', () => {
  it.each([
    ['https://127.0.0.1/', 'loopback'],
    ['https://2130706433/', 'loopback'], // decimal
    ['https://0177.0.0.1/', 'loopback'], // octal
    ['https://017700000001/', 'loopback'], // one octal number
    ['https://0x7f.0.0.1/', 'loopback'], // hex octet
    ['https://0x7f000001/', 'loopback'], // one hex number
    ['https://0x7f.1/', 'loopback'], // hex, shortened
    ['https://127.1/', 'loopback'], // shortened
    ['https://127.000.000.001/', 'loopback'], // zero-padded
    ['https://127.0.0.1./', 'loopback'], // trailing dot
    ['https://%31%32%37.0.0.1/', 'loopback'], // percent-encoded
    ['https://0/', 'unspecified'],
    ['https://0300.0250.0.1/', 'private'], // octal 192.168.0.1
    ['https://10.1/', 'private'],
    ['https://0xa9fea9fe/', 'linkLocal'], // cloud metadata, hex
    ['https://2852039166/', 'linkLocal'], // cloud metadata, decimal
    ['https://100.64.0.1/', 'carrierGradeNat'],
    ['https://[::1]/', 'loopback'],
    ['https://[0000:0000::0001]/', 'loopback'],
    ['https://[::]/', 'unspecified'],
    ['https://[::ffff:127.0.0.1]/', 'loopback'], // IPv4-mapped, dotted
    ['https://[::FFFF:7F00:1]/', 'loopback'], // IPv4-mapped, hex, upper case
    ['https://[0:0:0:0:0:ffff:a9fe:a9fe]/', 'linkLocal'], // IPv4-mapped, long form
    ['https://[64:ff9b::127.0.0.1]/', 'rfc6052'], // NAT64
    ['https://[fe80::1]/', 'linkLocal'],
    ['https://[fd00::1]/', 'uniqueLocal'],
    ['https://[ff02::1]/', 'multicast'],
  ])('%s is refused (%s)', (url, range) => {
    expect(() => checkUrlAgainst(url, policy)).toThrowError(new RegExp(` is a ${range} address, which webhooks may not reach$`))
  })

  it('refuses IPv4-compatible IPv6 literals', () => {
    expect(() => checkUrlAgainst('https://[::127.0.0.1]/', policy)).toThrowError(/IPv4-compatible/)
  })

  it('refuses with a GuardRefusal', () => {
    expect(() => checkUrlAgainst('https://127.1/', policy)).toThrowError(GuardRefusal)
  })

  it.each([
    ['ftp://example.com/', /must use http or https/],
    ['https://user:pw@example.com/', /user name or password/],
    ['https://example.com:8443/', /port 8443 is not allowed/],
    ['http://example.com/', /must use https/],
    ['not a url', /is not a URL/],
  ])('%s is refused', (url, why) => {
    expect(() => checkUrlAgainst(url, policy)).toThrowError(why)
  })

  it('lets global unicast hosts and the allowlist through', () => {
    expect(checkUrlAgainst('https://93.184.215.14/hook', policy).hostname).toBe('93.184.215.14')
    expect(checkUrlAgainst('https://hooks.example.com/x', policy).hostname).toBe('hooks.example.com')
    expect(checkUrlAgainst('http://127.0.0.1:4100/sink', policy).port).toBe('4100')
    expect(() => checkUrlAgainst('http://127.0.0.1:4101/sink', policy)).toThrowError(GuardRefusal)
  })
})
