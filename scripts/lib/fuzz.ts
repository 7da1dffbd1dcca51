// Generated bad requests (fast-check) against the ingest and console routes. Every request
// made here is wrong in a way the API must refuse: a missing or mistyped field, an unknown
// field, a broken file, a bad header, a bad query, an id that names nothing. `npm run chaos`
// sends at least 10,000; the test suite sends a few hundred (tests/api/fuzz.test.ts). What
// each must get back is a 4xx problem document (RFC 9457) and no row written.
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
    fc.string({ maxLength: 12 }).filter(r => !['admin', 'lab_manager', 'integrator', 'viewer'].includes(r)).map(role => send('PATCH', `/api/console/users/${t.userId}`, { role }, 'an unknown role')),
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

/** The generator of bad requests: about half to ingest, half to the console. */
export function badRequests(t: FuzzTarget): fc.Arbitrary<BadRequest> {
  return fc.oneof(ingestRequests(t), consoleRequests(t))
}

export interface FuzzOutcome { status: number, problem: boolean }

/** Sends one request to `base` and says whether the answer is a problem document. */
export async function sendBadRequest(base: string, r: BadRequest): Promise<FuzzOutcome> {
  const res = await fetch(`${base}${r.path}`, { method: r.method, headers: r.headers, body: r.body, redirect: 'manual' })
  const text = await res.text()
  let problem = false
  if ((res.headers.get('content-type') ?? '').startsWith('application/problem+json')) {
    try {
      const doc = JSON.parse(text) as { type?: unknown, title?: unknown, status?: unknown }
      problem = typeof doc.type === 'string' && typeof doc.title === 'string' && doc.status === res.status
    }
    catch { problem = false }
  }
  return { status: res.status, problem }
}

/** Every table of the schema: a refused request must change none of them (the rate limiter is off in fuzz runs). */
export const guardedTables = Object.values(schema as Record<string, unknown>).filter((t): t is PgTable => is(t, PgTable)).map(t => getTableName(t))

/** Row counts of every guarded table, to compare before and after. */
export async function rowCounts(sql: postgres.Sql): Promise<Record<string, number>> {
  const [row] = await sql.unsafe(`select ${guardedTables.map(t => `(select count(*) from "${t}")::int as "${t}"`).join(', ')}`)
  return row as Record<string, number>
}

/** What changed between two row counts, by table. */
export function rowsWritten(before: Record<string, number>, after: Record<string, number>) {
  return Object.fromEntries(guardedTables.filter(t => after[t] !== before[t]).map(t => [t, after[t]! - before[t]!]))
}
