// Generated bad requests (fast-check) against the ingest and console routes. Every request
// made here is wrong in a way the API must refuse: a missing or mistyped field, an unknown
// field, a broken file, a bad header, a bad query, an id that names nothing. `npm run chaos`
// sends at least 10,000; the test suite sends a few hundred (tests/api/fuzz.test.ts). What
// each must get back is a 4xx problem document (RFC 9457) and no row written.
//
// `exhaustionRequests` is the other half of chaos's fuzz phase: a fixed list of requests
// built to exhaust a process rather than to be wrong (bodies past the cap sent chunked with
// no Content-Length, strings that make backtracking regular expressions run for minutes,
// compressed bombs, prototype keys, malformed credentials). They too must each get a 4xx
// problem document; chaos measures the event-loop stall and peak RSS they cause.
import { request as httpRequest } from 'node:http'
import { deflateSync } from 'node:zlib'
import { getTableName, is } from 'drizzle-orm'
import { PgTable } from 'drizzle-orm/pg-core'
import fc from 'fast-check'
import type postgres from 'postgres'
import * as schema from '../../server/database/schema'

export interface FuzzTarget {
  /** A lab with an instrument `instrumentSlug` and a key (`labKey`) of both scopes. */
  labId: string
  instrumentSlug: string
  labKey: string
  partnerId: string
  userId: string
  /** An admin's session cookie for the console routes. */
  cookie: string
  /** host:port pairs the SSRF guard lets through in this run, which generated URLs avoid. */
  allowedHosts: string[]
}

export interface BadRequest { method: string, path: string, headers: Record<string, string>, body?: string, why: string }

const json = (value: unknown) => JSON.stringify(value)
const anyJson = fc.jsonValue({ maxDepth: 2 })
/** A value that is not a string. */
const notString = fc.oneof(fc.integer(), fc.boolean(), fc.constant(null), fc.array(fc.integer(), { maxLength: 3 }), fc.dictionary(fc.string({ maxLength: 4 }), fc.integer(), { maxKeys: 2 }))
/** A value that is neither an object nor undefined. */
const notObject = fc.oneof(fc.integer(), fc.string({ maxLength: 8 }), fc.boolean(), fc.constant(null), fc.array(fc.integer(), { maxLength: 3 }))
const notNumber = fc.oneof(fc.string({ maxLength: 6 }), fc.boolean(), fc.constant(null), fc.dictionary(fc.string({ maxLength: 3 }), fc.integer(), { maxKeys: 1 }))
/** A string that is not a slug (slugs are lower-case letters, digits and hyphens). */
const notSlug = fc.oneof(fc.constant(''), fc.string({ minLength: 1, maxLength: 12 }).map(s => `Bad ${s}`), fc.string({ minLength: 65, maxLength: 80 }))

/** A valid acquisition body (sent only mutated): a short field sweep of the target's instrument. */
function validAcquisition(t: FuzzTarget) {
  const n = 40
  return {
    instrument: t.instrumentSlug, runId: 'fuzz-base', acquiredAt: '2026-11-30T10:00:00Z', sampleRef: 'FUZZ',
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field', unit: 'T', values: Array.from({ length: n }, (_, i) => 0.47 + i * 1e-4) },
    detectors: [{ unit: 'fA', values: Array.from({ length: n }, (_, i) => 5 + (i % 7)) }],
  } as unknown as Record<string, unknown> & { sweep: { values: unknown[] }, detectors: { values: unknown[] }[], settings: { acceleratingVoltage: Record<string, unknown> } }
}

const topFields = ['instrument', 'runId', 'acquiredAt', 'sampleRef', 'settings', 'sweep', 'detectors', 'processing']

/** One guaranteed-invalid change to a valid acquisition body. */
function acquisitionMutation(t: FuzzTarget): fc.Arbitrary<{ body: unknown, why: string }> {
  const base = () => structuredClone(validAcquisition(t))
  return fc.oneof(
    fc.constantFrom('instrument', 'runId', 'acquiredAt').map((k) => {
      const b = Object.fromEntries(Object.entries(base()).filter(([key]) => key !== k))
      return { body: b, why: `no ${k}` }
    }),
    fc.tuple(fc.string({ minLength: 1, maxLength: 12 }).filter(k => !topFields.includes(k) && k !== '__proto__'), anyJson)
      .map(([k, v]) => ({ body: { ...base(), [k]: v }, why: `unknown field ${k}` })),
    fc.tuple(fc.constantFrom('instrument', 'runId', 'acquiredAt', 'sampleRef'), notString).map(([k, v]) => ({ body: { ...base(), [k]: v }, why: `${k} not a string` })),
    fc.tuple(fc.constantFrom('settings', 'sweep', 'processing'), notObject).map(([k, v]) => ({ body: { ...base(), [k]: v }, why: `${k} not an object` })),
    notObject.filter(v => !Array.isArray(v)).map(v => ({ body: { ...base(), detectors: v }, why: 'detectors not an array' })),
    fc.tuple(fc.nat({ max: 39 }), notNumber).map(([i, v]) => { const b = base(); b.sweep.values[i] = v; return { body: b, why: `sweep value ${i} not a number` } }),
    fc.integer({ min: 1, max: 39 }).map((k) => { const b = base(); b.detectors[0]!.values.splice(0, k); return { body: b, why: 'detector shorter than the sweep' } }),
    fc.string({ maxLength: 20 }).map(s => ({ body: { ...base(), acquiredAt: `x${s}` }, why: 'acquiredAt not a date' })),
    fc.string({ maxLength: 16 }).filter(u => !['V', 'kV', 'mV'].includes(u.trim())).map((u) => {
      const b = base(); b.settings.acceleratingVoltage.unit = u; return { body: b, why: 'an unknown voltage unit' }
    }),
    fc.double({ min: 1e-9, max: 1e9, noNaN: true }).map((u) => { const b = base(); b.settings.acceleratingVoltage.u = -u; return { body: b, why: 'a negative uncertainty' } }),
    fc.stringMatching(/^[a-z0-9]{1,10}$/).map(s => ({ body: { ...base(), instrument: `nope-${s}` }, why: 'an instrument the lab does not have' })),
    notSlug.map(s => ({ body: { ...base(), instrument: s }, why: 'an instrument that is not a slug' })),
    fc.string({ maxLength: 12 }).map(id => ({ body: { ...base(), processing: { ratios: [{ id: `nope:${id}` }] } }, why: 'an unknown reference ratio' })),
    anyJson.filter(v => v === null || typeof v !== 'object' || Array.isArray(v)).map(v => ({ body: v, why: 'a body that is not an object' })),
  )
}

function notJson(): fc.Arbitrary<string> {
  return fc.string({ minLength: 1, maxLength: 60 }).filter((s) => { try { JSON.parse(s); return false } catch { return true } })
}

/** Metadata-free text, so that a file never names its instrument or run and cannot be accepted. */
const noMetadata = (s: string) => !s.split(/[\n\r\u2028\u2029]/).some(l => l.trimStart().startsWith('#')) && !s.includes('##') && !/instrument|runid/i.test(s)

function ingestRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  const auth = { authorization: `Bearer ${t.labKey}` }
  const post = (body: string, type: string, why: string, extra: Record<string, string> = {}): BadRequest =>
    ({ method: 'POST', path: '/api/v1/acquisitions', headers: { ...auth, 'content-type': type, ...extra }, body, why })
  return fc.oneof(
    { weight: 6, arbitrary: acquisitionMutation(t).map(m => post(json(m.body), 'application/json', m.why)) },
    { weight: 1, arbitrary: notJson().map(s => post(s, 'application/json', 'malformed JSON')) },
    { weight: 1, arbitrary: fc.tuple(fc.constantFrom('text/plain', 'image/png', 'application/x-www-form-urlencoded'), fc.string({ maxLength: 40 })).map(([type, s]) => post(s, type, `content type ${type}`)) },
    { weight: 1, arbitrary: fc.array(fc.string({ maxLength: 30 }), { maxLength: 8 }).map(l => l.join('\n')).filter(noMetadata).map(s => post(s, 'text/csv', 'a CSV without metadata')) },
    { weight: 1, arbitrary: fc.string({ maxLength: 200 }).filter(noMetadata).map(s => post(s, 'chemical/x-jcamp-dx', 'a JCAMP-DX block without ##END=')) },
    { weight: 1, arbitrary: fc.string({ maxLength: 200 }).filter(noMetadata).map(s => post(`<mzML>${s}`, 'application/mzml+xml', 'broken mzML')) },
    // Header values lose their outer spaces on the way, and Number() reads "1e0" as 1: the
    // generated values are wrong whatever is trimmed or parsed (chaos found both the hard way).
    { weight: 1, arbitrary: fc.stringMatching(/^[A-Za-z0-9_-]{256,300}$/).map(k => post(json(validAcquisition(t)), 'application/json', 'an Idempotency-Key too long', { 'idempotency-key': k })) },
    { weight: 1, arbitrary: fc.oneof(fc.constantFrom('0', '-1', '1.5', '-0.5', '999999'), fc.stringMatching(/^[a-z]{1,6}$/)).map(v => post(json(validAcquisition(t)), 'application/json', 'a bad schema version', { 'arcwise-schema-version': v })) },
    { weight: 1, arbitrary: fc.string({ maxLength: 10 }).map(s => ({ method: 'POST', path: '/api/v1/acquisitions', headers: { 'authorization': `Bearer awk_${s}`, 'content-type': 'application/json' }, body: json(validAcquisition(t)), why: 'a wrong key' })) },
    { weight: 1, arbitrary: fc.record({ limit: fc.oneof(fc.integer({ min: -5, max: 0 }), fc.integer({ min: 201, max: 10_000 }), fc.constantFrom('1.5', 'ten', '-'), fc.stringMatching(/^[a-z]{1,4}$/)) })
      .map(q => ({ method: 'GET', path: `/api/v1/acquisitions?limit=${encodeURIComponent(String(q.limit))}`, headers: auth, why: 'a bad page size' })) },
    { weight: 1, arbitrary: fc.base64String({ minLength: 4, maxLength: 40 }).map(c => ({ method: 'GET', path: `/api/v1/acquisitions?cursor=${encodeURIComponent(c)}`, headers: auth, why: 'a cursor the API never gave' })) },
  )
}

const uuidLike = fc.uuid()
/** local@domain.tld: one @, no spaces, a dot inside the domain (what the console's schema takes, roughly). */
function looksLikeEmail(s: string) {
  const parts = s.split('@')
  if (parts.length !== 2 || /\s/.test(s)) return false
  const [local, domain] = parts as [string, string]
  const dot = domain.indexOf('.', 1)
  return local.length > 0 && dot > 0 && dot < domain.length - 1
}
/** A URL the SSRF guard or the schema must refuse. */
function refusedUrl(t: FuzzTarget): fc.Arbitrary<string> {
  return fc.oneof(
    fc.string({ maxLength: 30 }).filter(s => !URL.canParse(s)),
    fc.constantFrom('ftp', 'file', 'gopher', 'javascript').map(scheme => `${scheme}://example.org/hook`),
    fc.tuple(fc.constantFrom('10', '192.168', '169.254', '127'), fc.nat({ max: 255 }), fc.integer({ min: 1, max: 65_535 }))
      .map(([prefix, octet, port]) => `http://${prefix}${prefix.includes('.') ? '' : '.0'}.${octet}.1:${port}/hook`)
      .filter(u => !t.allowedHosts.includes(new URL(u).host)),
  )
}

function consoleRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  const headers = { 'cookie': t.cookie, 'content-type': 'application/json' }
  const send = (method: string, path: string, body: unknown, why: string): BadRequest => ({ method, path, headers, body: body === undefined ? undefined : json(body), why })
  const lab = { slug: 'fuzz-lab', name: 'Fuzz lab', site: 'Bench', contactEmail: 'fuzz@example.org' }
  const geometry = { kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } }
  return fc.oneof(
    notSlug.map(s => send('POST', '/api/console/labs', { ...lab, slug: s }, 'a lab slug that is not a slug')),
    fc.string({ maxLength: 20 }).filter(s => !looksLikeEmail(s.trim())).map(e => send('POST', '/api/console/labs', { ...lab, contactEmail: e }, 'a contact e-mail that is not one')),
    fc.oneof(fc.double({ max: 0, noNaN: true }), notNumber).map(v => send('POST', `/api/console/labs/${t.labId}/instruments`, { slug: 'fuzz-i', name: 'Fuzz', geometry: { ...geometry, analyzerRadius: { value: v, unit: 'cm' } } }, 'a radius that is not a positive number')),
    fc.string({ maxLength: 10 }).filter(u => !['m', 'cm', 'mm'].includes(u)).map(u => send('POST', `/api/console/labs/${t.labId}/instruments`, { slug: 'fuzz-i', name: 'Fuzz', geometry: { ...geometry, analyzerRadius: { value: 27, unit: u } } }, 'an unknown length unit')),
    fc.string({ maxLength: 16 }).filter(k => !['potential-sector', 'wien-sector', 'multi-collector'].includes(k)).map(k => send('POST', `/api/console/labs/${t.labId}/instruments`, { slug: 'fuzz-i', name: 'Fuzz', geometry: { ...geometry, kind: k } }, 'an unknown geometry kind')),
    fc.oneof(fc.constant([]), fc.array(fc.string({ maxLength: 12 }).filter(s => !['acquisitions:write', 'results:read'].includes(s)), { minLength: 1, maxLength: 3 }))
      .map(scopes => send('POST', `/api/console/labs/${t.labId}/keys`, { name: 'fuzz key', scopes }, 'no scope, or an unknown one')),
    fc.date({ min: new Date('2000-01-01'), max: new Date('2026-01-01') }).map(d => send('POST', `/api/console/labs/${t.labId}/keys`, { name: 'fuzz key', scopes: ['results:read'], expiresAt: d.toISOString() }, 'a key that expired already')),
    refusedUrl(t).map(url => send('POST', `/api/console/partners/${t.partnerId}/endpoints`, { url }, 'an endpoint URL to refuse')),
    fc.string({ maxLength: 12 }).filter(r => !['admin', 'lab_manager', 'lab_reviewer', 'integrator', 'viewer'].includes(r)).map(role => send('PATCH', `/api/console/users/${t.userId}`, { role }, 'an unknown role')),
    fc.string({ maxLength: 20 }).filter(s => !s.includes('@')).map(email => send('POST', '/api/console/invitations', { email, role: 'viewer' }, 'an invitation to no e-mail')),
    fc.oneof(fc.integer({ min: -5, max: 0 }), fc.integer({ min: 201, max: 9999 })).map(l => send('GET', `/api/console/labs/${t.labId}/acquisitions?limit=${l}`, undefined, 'a bad page size')),
    fc.string({ minLength: 1, maxLength: 10 }).map(s => send('GET', `/api/console/labs/${t.labId}/acquisitions?sort=x${encodeURIComponent(s)}`, undefined, 'an unknown order')),
    // Characters that route elsewhere once decoded (?, /, #, ., %, \) are left out: /labs/%3F is the list of labs.
    fc.string({ minLength: 1, maxLength: 20 }).filter(s => !/^[0-9a-f-]{36}$/.test(s) && !/[?/#.%\\]/.test(s)).map(s => send('GET', `/api/console/labs/${encodeURIComponent(s)}`, undefined, 'a lab id that is not one')),
    uuidLike.map(id => send('GET', `/api/console/labs/${t.labId}/acquisitions/${id}`, undefined, 'an acquisition that does not exist')),
    uuidLike.map(id => send('POST', `/api/console/partners/${t.partnerId}/deliveries/${id}/replay`, {}, 'a replay of a delivery that does not exist')),
    fc.record({ degree: fc.integer({ min: 1, max: 3 }), acquisitionId: uuidLike }).map(b => send('POST', `/api/console/labs/${t.labId}/instruments/${t.labId}/calibrations/preview`, b, 'a calibration of an instrument that does not exist')),
  )
}

// ── Exhaustion bait ──────────────────────────────────────────────────────────────────
/**
 * Strings that make a super-linear regular expression run for a long time: nested or
 * adjacent quantifiers over the same characters, with no way to match at the end. The issue
 * that added them measured the CSV unit parser at 3.8 s, 34 s and 183 s for an opening
 * parenthesis followed by 2,000, 4,000 and 8,000 spaces and a letter.
 */
export function backtrackingBait(spaces = 5000): Record<string, string> {
  const pad = ' '.repeat(spaces)
  return {
    'open parenthesis, spaces, letter': `(${pad}x`,
    'name, open parenthesis, spaces, letter': `field (${pad}x`,
    'name, open bracket, spaces, letter': `field [${pad}x`,
    'letters then a mismatch': `${'a'.repeat(spaces)}!`,
    'number-like letters then a mismatch': `1${'e'.repeat(spaces)}!`,
    'word then spaces then no separator': `A${pad}x`,
    'dots and at-signs': `${'a.'.repeat(spaces / 2)}@`,
  }
}

/** Own-property names that a lookup through the prototype chain finds in every object. */
export const prototypeKeys = ['__proto__', 'constructor', 'prototype', 'toString', 'hasOwnProperty'] as const

/** A JSON text with `key` as an own property of the object at `path` (JSON.stringify would drop __proto__). */
function withRawKey(body: unknown, path: string[], key: string, value: unknown): string {
  const marker = '"__fuzz_marker__"'
  const clone = structuredClone(body) as Record<string, unknown>
  let at = clone
  for (const p of path) at = at[p] as Record<string, unknown>
  at.__fuzz_marker__ = value
  return JSON.stringify(clone).replace(marker, JSON.stringify(key))
}

function prototypeRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  const ingest = (body: string, why: string): BadRequest => ({ method: 'POST', path: '/api/v1/acquisitions', headers: { 'authorization': `Bearer ${t.labKey}`, 'content-type': 'application/json' }, body, why })
  const consolePost = (path: string, body: string, why: string): BadRequest => ({ method: 'POST', path, headers: { 'cookie': t.cookie, 'content-type': 'application/json' }, body, why })
  const setting = { value: 3, unit: 'kV', u: 0.0006 }
  const geometry = { kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } }
  const instrument = (slugSuffix: string) => ({ slug: `fuzz-proto-${slugSuffix}`, name: 'Fuzz', geometry })
  const csv = (line: string) => `# ${line}\nfield [T],detector [fA]\n0.47,5\n0.4701,6\n`
  const key = fc.constantFrom(...prototypeKeys)
  const value = fc.oneof(fc.constant(setting), fc.constant({}), fc.constant(1), fc.constant('x'))
  return fc.oneof(
    fc.tuple(key, value).map(([k, v]) => ingest(withRawKey(validAcquisition(t), [], k, v), `prototype key ${k} in an acquisition`)),
    fc.tuple(key, value).map(([k, v]) => ingest(withRawKey(validAcquisition(t), ['settings'], k, v), `prototype key ${k} in settings`)),
    fc.tuple(key, value).map(([k, v]) => ingest(withRawKey(validAcquisition(t), ['settings', 'acceleratingVoltage'], k, v), `prototype key ${k} in a setting's value`)),
    fc.tuple(key, value, fc.stringMatching(/^[a-z0-9]{6}$/)).map(([k, v, s]) => consolePost(`/api/console/labs/${t.labId}/instruments`, withRawKey(instrument(s), ['geometry', 'analyzerRadius'], k, v), `prototype key ${k} in a geometry value`)),
    fc.tuple(key, value, fc.stringMatching(/^[a-z0-9]{6}$/)).map(([k, v, s]) => consolePost(`/api/console/labs/${t.labId}/instruments`, withRawKey(instrument(s), ['geometry'], k, v), `prototype key ${k} in a geometry`)),
    fc.tuple(key, fc.constantFrom('3 kV', '1', 'x')).map(([k, v]) => ({ method: 'POST', path: '/api/v1/acquisitions', headers: { 'authorization': `Bearer ${t.labKey}`, 'content-type': 'text/csv' }, body: csv(`${k}: ${v}`), why: `prototype key ${k} as CSV metadata` })),
  )
}

function malformedAuthRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  const garbage = fc.oneof(fc.string({ maxLength: 40 }), fc.constantFrom('%', '%E0%A4%A', '%%%', ':', '::', '\u0000', 'a'.repeat(8000)), fc.base64String({ maxLength: 40 }))
  // A header value must be a valid ByteString without line breaks, or fetch refuses to send it.
  const asHeader = (s: string) => s.replace(/[^\x20-\x7e]/g, '%')
  const basicOf = (s: string) => `Basic ${Buffer.from(s).toString('base64')}`
  const tokenForm = 'grant_type=client_credentials&scope=results%3Aread'
  return fc.oneof(
    garbage.map(g => ({ method: 'POST', path: '/api/v1/oauth/token', headers: { 'authorization': `Basic ${asHeader(g)}`, 'content-type': 'application/x-www-form-urlencoded' }, body: tokenForm, why: 'Basic credentials that are not base64' })),
    garbage.map(g => ({ method: 'POST', path: '/api/v1/oauth/token', headers: { 'authorization': basicOf(g), 'content-type': 'application/x-www-form-urlencoded' }, body: tokenForm, why: 'Basic credentials that decode to garbage' })),
    fc.constantFrom('%', '%zz:%zz', 'id:%E0%A4%A', '%:x').map(g => ({ method: 'POST', path: '/api/v1/oauth/token', headers: { 'authorization': basicOf(g), 'content-type': 'application/x-www-form-urlencoded' }, body: tokenForm, why: 'Basic credentials with broken percent-encoding' })),
    fc.tuple(fc.constantFrom('/api/v1/acquisitions', '/api/v1/events', '/api/v1/peaks?mz=44&tolerance=0.1'), garbage, fc.constantFrom('Bearer ', 'Bearer', 'bearer ', 'Basic ', 'Token ', ''))
      .map(([path, g, scheme]) => ({ method: 'GET', path, headers: { authorization: `${scheme}${asHeader(g)}` }, why: 'a malformed bearer credential' })),
    fc.tuple(fc.constantFrom('/api/console/labs', '/api/console/session', `/api/console/partners/${t.partnerId}/endpoints`), garbage, fc.constantFrom('nuxt-session=', 'nuxt-session=Fe26.2**', 'other=1; nuxt-session='))
      .map(([path, g, prefix]) => ({ method: 'GET', path, headers: { cookie: `${prefix}${asHeader(g)}` }, why: 'a session cookie that is not one' })),
  )
}

/** Backtracking bait in the text fields of JSON bodies (every one of these is too long or malformed for its field). */
function baitInTextFields(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  const baits = Object.values(backtrackingBait(5000))
  const bait = fc.constantFrom(...baits)
  const ingest = (body: unknown, why: string): BadRequest => ({ method: 'POST', path: '/api/v1/acquisitions', headers: { 'authorization': `Bearer ${t.labKey}`, 'content-type': 'application/json' }, body: json(body), why })
  const consoleSend = (method: string, path: string, body: unknown, why: string): BadRequest => ({ method, path, headers: { 'cookie': t.cookie, 'content-type': 'application/json' }, body: json(body), why })
  const lab = { slug: 'fuzz-lab', name: 'Fuzz lab', site: 'Bench', contactEmail: 'fuzz@example.org' }
  return fc.oneof(
    fc.tuple(fc.constantFrom('instrument', 'runId', 'acquiredAt', 'sampleRef'), bait).map(([k, b]) => ingest({ ...validAcquisition(t), [k]: b }, `backtracking bait in ${k}`)),
    bait.map((b) => { const body = validAcquisition(t); body.settings.acceleratingVoltage.unit = b; return ingest(body, 'backtracking bait in a setting unit') }),
    bait.map(b => ingest({ ...validAcquisition(t), sweep: { ...validAcquisition(t).sweep, unit: b } }, 'backtracking bait in the sweep unit')),
    fc.tuple(fc.constantFrom('slug', 'name', 'site', 'contactEmail'), bait).map(([k, b]) => consoleSend('POST', '/api/console/labs', { ...lab, [k]: b }, `backtracking bait in a lab's ${k}`)),
    fc.tuple(fc.constantFrom('url', 'description'), bait).map(([k, b]) => consoleSend('POST', `/api/console/partners/${t.partnerId}/endpoints`, { url: 'ftp://refused.example/hook', [k]: b }, `backtracking bait in an endpoint's ${k}`)),
    bait.map(b => consoleSend('POST', '/api/console/session', { email: b, password: 'x' }, 'backtracking bait as a sign-in e-mail')),
    bait.map(b => consoleSend('POST', '/api/console/invitations', { email: b, role: 'viewer' }, 'backtracking bait as an invitation e-mail')),
  )
}

/** The generator of bad requests: about half to ingest, half to the console, a tenth each of prototype keys, malformed credentials and backtracking bait. */
export function badRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  return fc.oneof(
    { weight: 7, arbitrary: ingestRequests(t) },
    { weight: 7, arbitrary: consoleRequests(t) },
    { weight: 2, arbitrary: prototypeRequests(t) },
    { weight: 2, arbitrary: malformedAuthRequests(t) },
    { weight: 2, arbitrary: baitInTextFields(t) },
  )
}

/** A request whose body is streamed chunked, with no Content-Length: `bytes` of `fill` after `head`. */
export interface ChunkedRequest { method: string, path: string, headers: Record<string, string>, chunked: { head: string, fill: string, bytes: number }, why: string }
export type ExhaustionRequest = BadRequest | ChunkedRequest

/** mzML with one spectrum whose m/z array is zlib of `zeroBytes` zero bytes. */
export function mzmlBomb(zeroBytes: number, extra = ''): string {
  // deflateSync of zeros compresses about 1,000:1, so 256 MiB of zeros is about 256 kB here.
  const bomb = deflateSync(Buffer.alloc(zeroBytes), { level: 9 }).toString('base64')
  const small = Buffer.from(new Float64Array([1, 2]).buffer).toString('base64')
  const array = (accession: string, binary: string, zlib: boolean) => `<binaryDataArray><cvParam accession="MS:1000523"/>${zlib ? '<cvParam accession="MS:1000574"/>' : ''}<cvParam accession="${accession}"/><binary>${binary}</binary></binaryDataArray>`
  return `<?xml version="1.0"?><mzML><run id="r"${extra}><spectrumList count="1"><spectrum id="s" index="0"><binaryDataArrayList count="2">${array('MS:1000514', bomb, true)}${array('MS:1000515', small, false)}</binaryDataArrayList></spectrum></spectrumList></run></mzML>`
}

export interface ExhaustionCaps {
  /** What an upload to the ingest route may be at most (MAX_UPLOAD_BYTES). */
  uploadBytes: number
  /** What a console, token or other JSON body may be at most. */
  jsonBytes: number
  /** Spaces in the backtracking bait. */
  baitSpaces?: number
}

/**
 * The fixed list of requests built to exhaust a process. Each is refused by a correct server
 * with a 4xx problem document after bounded work: the chunked bodies with 413 once the cap is
 * passed (they run 8 MB past it), the rest as any bad request.
 */
export function exhaustionRequests(t: FuzzTarget, caps: ExhaustionCaps): { request: ExhaustionRequest, category: string }[] {
  const out: { request: ExhaustionRequest, category: string }[] = []
  const add = (category: string, request: ExhaustionRequest) => out.push({ category, request })
  const lab = { authorization: `Bearer ${t.labKey}` }
  const over = (cap: number) => cap + 8 * 1024 * 1024

  // Bodies past the cap, chunked with no Content-Length.
  add('body past the cap, chunked', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'application/json' }, chunked: { head: '{"instrument":"', fill: 'x'.repeat(64 * 1024), bytes: over(caps.uploadBytes) }, why: 'a JSON acquisition past the upload cap, chunked' })
  add('body past the cap, chunked', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'text/csv' }, chunked: { head: '# instrument: nope\nfield [T],detector [fA]\n', fill: '0.47,5\n'.repeat(8192), bytes: over(caps.uploadBytes) }, why: 'a CSV upload past the upload cap, chunked' })
  add('body past the cap, chunked', { method: 'POST', path: '/api/console/session', headers: { 'content-type': 'application/json' }, chunked: { head: '{"email":"a@b.c","password":"', fill: 'x'.repeat(64 * 1024), bytes: over(caps.jsonBytes) }, why: 'a sign-in body past the JSON cap, chunked' })
  add('body past the cap, chunked', { method: 'POST', path: '/api/v1/oauth/token', headers: { 'content-type': 'application/x-www-form-urlencoded' }, chunked: { head: 'grant_type=client_credentials&client_id=', fill: 'x'.repeat(64 * 1024), bytes: over(caps.jsonBytes) }, why: 'a token request past the JSON cap, chunked' })

  // Backtracking bait in every text field and CSV header cell.
  const baits = backtrackingBait(caps.baitSpaces)
  const csvPost = (body: string, why: string): BadRequest => ({ method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'text/csv' }, body, why })
  for (const [name, b] of Object.entries(baits)) {
    add('backtracking bait', csvPost(`${b},detector [fA]\n0.47,5\n`, `CSV header cell 1: ${name}`))
    add('backtracking bait', csvPost(`field [T],${b}\n0.47,5\n`, `CSV header cell 2: ${name}`))
    add('backtracking bait', csvPost(`# ${b}\nfield [T],detector [fA]\n0.47,5\n`, `CSV metadata line: ${name}`))
    add('backtracking bait', csvPost(`# acceleratingVoltage: ${b}\n# runId: ${b}\nfield [T],detector [fA]\n0.47,5\n`, `CSV setting and run id values: ${name}`))
    add('backtracking bait', csvPost(`# ratio: ${b}\n# formulas: ${b}\nfield [T],detector [fA]\n0.47,5\n`, `CSV processing values: ${name}`))
    add('backtracking bait', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'chemical/x-jcamp-dx' }, body: `##TITLE=${b}\n##$RUN ID=${b}\n##XUNITS=${b}\n##YUNITS=FA\n##XYDATA=(X++(Y..Y))\n1 2\n##END=\n`, why: `JCAMP-DX labels: ${name}` })
    add('backtracking bait', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'application/mzml+xml' }, body: `<mzML><run id="${b}"><userParam name="runId" value="${b}"/></run></mzML>`, why: `mzML attributes: ${name}` })
    for (const field of ['instrument', 'runId', 'acquiredAt', 'sampleRef']) {
      add('backtracking bait', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'application/json' }, body: json({ ...validAcquisition(t), [field]: b }), why: `JSON ${field}: ${name}` })
    }
    add('backtracking bait', { method: 'POST', path: '/api/console/labs', headers: { 'cookie': t.cookie, 'content-type': 'application/json' }, body: json({ slug: b, name: b, site: b, contactEmail: b }), why: `lab fields: ${name}` })
    add('backtracking bait', { method: 'POST', path: '/api/console/session', headers: { 'content-type': 'application/json' }, body: json({ email: b, password: b }), why: `sign-in fields: ${name}` })
  }

  // Compressed bombs: zlib of many MB of zeros in an mzML binary array.
  for (const mib of [64, 256]) {
    add('compressed bomb', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'application/mzml+xml' }, body: mzmlBomb(mib * 1024 * 1024), why: `mzML m/z array inflating to ${mib} MiB of zeros` })
  }

  // Prototype keys in JSON bodies and CSV metadata and settings.
  for (const k of prototypeKeys) {
    add('prototype key', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'application/json' }, body: withRawKey(validAcquisition(t), ['settings'], k, { value: 3, unit: 'kV' }), why: `${k} in settings` })
    add('prototype key', { method: 'POST', path: '/api/v1/acquisitions', headers: { ...lab, 'content-type': 'text/csv' }, body: `# ${k}: 3 kV\nfield [T],detector [fA]\n0.47,5\n0.4701,6\n`, why: `${k} as CSV metadata` })
    add('prototype key', { method: 'POST', path: `/api/console/labs/${t.labId}/instruments`, headers: { 'cookie': t.cookie, 'content-type': 'application/json' }, body: withRawKey({ slug: `fuzz-proto-${k.replace(/_/g, '')}`.toLowerCase(), name: 'Fuzz', geometry: { kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } } }, ['geometry', 'analyzerRadius'], k, 0), why: `${k} in a geometry value` })
  }

  // Malformed credentials.
  for (const basic of ['%%%', '!!!', Buffer.from('%E0%A4%A:x').toString('base64'), Buffer.from('no-colon').toString('base64'), '']) {
    add('malformed credentials', { method: 'POST', path: '/api/v1/oauth/token', headers: { 'authorization': `Basic ${basic}`, 'content-type': 'application/x-www-form-urlencoded' }, body: 'grant_type=client_credentials', why: `Basic ${basic || '(empty)'}` })
  }
  for (const bearer of ['Bearer', 'Bearer ', 'Bearer awk_', 'Bearer a.b.c', `Bearer ${'x'.repeat(8000)}`, 'Basic Og==']) {
    add('malformed credentials', { method: 'GET', path: '/api/v1/acquisitions', headers: { authorization: bearer }, why: `lab route with ${bearer.slice(0, 20)}` })
    add('malformed credentials', { method: 'GET', path: '/api/v1/events', headers: { authorization: bearer }, why: `partner route with ${bearer.slice(0, 20)}` })
  }
  for (const cookie of ['nuxt-session=', 'nuxt-session=garbage', 'nuxt-session=Fe26.2**x*y*z', `nuxt-session=${'A'.repeat(4000)}`, 'nuxt-session=%E0%A4%A']) {
    add('malformed credentials', { method: 'GET', path: '/api/console/labs', headers: { cookie }, why: `console with ${cookie.slice(0, 30)}` })
  }
  return out
}

export interface FuzzOutcome {
  status: number
  problem: boolean
  /** The answer names a function found through the prototype chain ("function Object()"). */
  leak: boolean
  /** No answer: the time ran out or the connection closed first. */
  error?: string
  /** For a chunked body, the bytes sent before the answer came. */
  sentBytes?: number
}

function outcomeOf(status: number, contentType: string, text: string): FuzzOutcome {
  let problem = false
  if (contentType.startsWith('application/problem+json')) {
    try {
      const doc = JSON.parse(text) as { type?: unknown, title?: unknown, status?: unknown }
      problem = typeof doc.type === 'string' && typeof doc.title === 'string' && doc.status === status
    }
    catch { problem = false }
  }
  return { status, problem, leak: /function \w*\(\)|\[native code\]/.test(text) }
}

/** Sends one request to `base` and says whether the answer is a problem document; gives up after `timeoutMs`. */
export async function sendBadRequest(base: string, r: BadRequest, timeoutMs = 30_000): Promise<FuzzOutcome> {
  try {
    const res = await fetch(`${base}${r.path}`, { method: r.method, headers: r.headers, body: r.body, redirect: 'manual', signal: AbortSignal.timeout(timeoutMs) })
    return outcomeOf(res.status, res.headers.get('content-type') ?? '', await res.text())
  }
  catch (error) {
    return { status: 0, problem: false, leak: false, error: (error as Error).name === 'TimeoutError' ? `no answer within ${timeoutMs} ms` : String((error as Error).message) }
  }
}

/**
 * Streams a chunked body (no Content-Length) until the server answers or `bytes` are sent,
 * and stops sending as soon as an answer comes: a server that reads the whole body first
 * has taken every byte by then.
 */
export function sendChunked(base: string, r: ChunkedRequest, timeoutMs = 60_000): Promise<FuzzOutcome> {
  return new Promise((resolve) => {
    let sent = 0
    let answered = false
    let settled = false
    const finish = (o: FuzzOutcome) => { if (!settled) { settled = true; clearTimeout(timer); resolve({ ...o, sentBytes: sent }) } }
    const req = httpRequest(`${base}${r.path}`, { method: r.method, headers: { ...r.headers, 'transfer-encoding': 'chunked' } })
    const timer = setTimeout(() => { req.destroy(); finish({ status: 0, problem: false, leak: false, error: `no answer within ${timeoutMs} ms` }) }, timeoutMs)
    req.on('response', (res) => {
      answered = true
      const chunks: Buffer[] = []
      res.on('data', c => chunks.push(c as Buffer))
      res.on('end', () => { finish(outcomeOf(res.statusCode ?? 0, String(res.headers['content-type'] ?? ''), Buffer.concat(chunks).toString())); req.destroy() })
      res.on('error', e => finish({ status: res.statusCode ?? 0, problem: false, leak: false, error: e.message }))
    })
    req.on('error', (e) => { if (!answered) finish({ status: 0, problem: false, leak: false, error: `connection closed before an answer (${e.message})` }) })
    const head = Buffer.from(r.chunked.head)
    const fill = Buffer.from(r.chunked.fill)
    const pump = () => {
      if (sent === 0) { req.write(head); sent += head.length }
      while (!answered && !req.destroyed && sent < r.chunked.bytes) {
        sent += fill.length
        if (!req.write(fill)) return void req.once('drain', pump)
      }
      if (!answered && !req.destroyed) req.end()
    }
    pump()
  })
}

/** Sends an exhaustion request, chunked or not. */
export function sendExhaustion(base: string, r: ExhaustionRequest, timeoutMs: number): Promise<FuzzOutcome> {
  return 'chunked' in r ? sendChunked(base, r, timeoutMs) : sendBadRequest(base, r, timeoutMs)
}

/**
 * Every table of the schema but the rate limiters' counters: a refused request must change
 * none of them. Counting attempts is what a limiter does for refused requests too, so
 * `rate_limits` is left out; audit entries that record a refusal (an action naming one) are
 * left out of `audit_log`'s count for the same reason, and every other audit entry counts.
 */
export const guardedTables = Object.values(schema as Record<string, unknown>).filter((t): t is PgTable => is(t, PgTable)).map(t => getTableName(t)).filter(t => t !== 'rate_limits')

const REFUSAL_ACTIONS = `'(refused|rejected|failed|denied|invalid)'`

/** Row counts of every guarded table, to compare before and after. */
export async function rowCounts(sql: postgres.Sql): Promise<Record<string, number>> {
  const count = (t: string) => t === 'audit_log' ? `(select count(*) from "${t}" where action !~ ${REFUSAL_ACTIONS})::int` : `(select count(*) from "${t}")::int`
  const [row] = await sql.unsafe(`select ${guardedTables.map(t => `${count(t)} as "${t}"`).join(', ')}`)
  return row as Record<string, number>
}

/** What changed between two row counts, by table. */
export function rowsWritten(before: Record<string, number>, after: Record<string, number>) {
  return Object.fromEntries(guardedTables.filter(t => after[t] !== before[t]).map(t => [t, after[t]! - before[t]!]))
}
