import { and, asc, desc, eq, ilike, or, sql, type AnyColumn, type SQL } from 'drizzle-orm'
import { acquisitions, deliveries, instruments, labs, partners, sequences, users, webhookEndpoints } from '../../database/schema'
import { can, type SessionUser } from '#shared/types/roles'
import type { SearchKind } from '#shared/schemas/search'

export interface SearchHit { kind: SearchKind, id: string, title: string, detail: string, to: string }

const PER_KIND = 5
const likeEscaped = (s: string) => s.replace(/[%_\\]/g, c => `\\${c}`)
// A webhook-id is the delivery's UUID: searched by its start once it is long enough to mean one.
const WEBHOOK_ID_START = /^[0-9a-f]{8}(?:-[0-9a-f-]{0,28})?$/i

/** Exact matches first, then those that start with the text, then the rest, by the column. */
function ranked(column: AnyColumn, q: string): SQL[] {
  return [desc(sql`lower(${column}) = lower(${q})`), desc(sql`${column} ilike ${`${likeEscaped(q)}%`}`), asc(column)]
}

/**
 * Everything the user may read that matches `q`: labs, instruments, runs, samples and sequences
 * of the labs they read (a lab manager: their own lab), partners and their webhook messages (an
 * integrator: their own partner), users for those who read users. Not yours is not found.
 */
export async function searchConsole(user: SessionUser, q: string): Promise<SearchHit[]> {
  const db = useDb()
  const contains = `%${likeEscaped(q)}%`
  const labScope = can(user.role, 'labs:read') ? (user.role === 'lab_manager' ? (user.labId ? eq(labs.id, user.labId) : sql`false`) : undefined) : null
  const partnerScope = can(user.role, 'partners:read') ? (user.role === 'integrator' ? (user.partnerId ? eq(partners.id, user.partnerId) : sql`false`) : undefined) : null
  const found: Promise<SearchHit[]>[] = []

  if (labScope !== null) {
    found.push(db.select({ id: labs.id, name: labs.name, slug: labs.slug, site: labs.site }).from(labs)
      .where(and(labScope, or(ilike(labs.name, contains), ilike(labs.slug, contains)))).orderBy(...ranked(labs.name, q)).limit(PER_KIND)
      .then(rows => rows.map((r): SearchHit => ({ kind: 'lab', id: r.id, title: r.name, detail: `${r.slug} · ${r.site}`, to: `/console/labs/${r.id}` }))))
    found.push(db.select({ id: instruments.id, name: instruments.name, slug: instruments.slug, labId: labs.id, lab: labs.name }).from(instruments)
      .innerJoin(labs, eq(labs.id, instruments.labId))
      .where(and(labScope, or(ilike(instruments.name, contains), ilike(instruments.slug, contains)))).orderBy(...ranked(instruments.name, q)).limit(PER_KIND)
      .then(rows => rows.map((r): SearchHit => ({ kind: 'instrument', id: r.id, title: r.name, detail: `${r.slug} · ${r.lab}`, to: `/console/labs/${r.labId}/instruments/${r.id}` }))))
    const acquisitionHits = (kind: 'acquisition' | 'sample', column: typeof acquisitions.externalId | typeof acquisitions.sampleRef) =>
      db.select({ id: acquisitions.id, runId: acquisitions.externalId, sample: acquisitions.sampleRef, acquiredAt: acquisitions.acquiredAt, labId: labs.id, lab: labs.name, instrument: instruments.name })
        .from(acquisitions).innerJoin(labs, eq(labs.id, acquisitions.labId)).innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
        .where(and(labScope, ilike(column, contains))).orderBy(...ranked(column, q)).limit(PER_KIND)
        .then(rows => rows.map((r): SearchHit => ({
          kind, id: r.id, title: kind === 'sample' ? r.sample ?? r.runId : r.runId,
          detail: `${kind === 'sample' ? `run ${r.runId}` : r.sample ? `sample ${r.sample}` : 'no sample'} · ${r.instrument} · ${r.lab} · ${r.acquiredAt.toISOString().slice(0, 10)}`,
          to: `/console/labs/${r.labId}/acquisitions/${r.id}`,
        })))
    found.push(acquisitionHits('acquisition', acquisitions.externalId), acquisitionHits('sample', acquisitions.sampleRef))
    found.push(db.select({ id: sequences.id, externalId: sequences.externalId, status: sequences.status, labId: labs.id, lab: labs.name }).from(sequences)
      .innerJoin(labs, eq(labs.id, sequences.labId))
      .where(and(labScope, ilike(sequences.externalId, contains))).orderBy(...ranked(sequences.externalId, q)).limit(PER_KIND)
      .then(rows => rows.map((r): SearchHit => ({ kind: 'sequence', id: r.id, title: r.externalId, detail: `${r.status} · ${r.lab}`, to: `/console/labs/${r.labId}/sequences/${r.id}` }))))
  }

  if (partnerScope !== null) {
    found.push(db.select({ id: partners.id, name: partners.name, slug: partners.slug }).from(partners)
      .where(and(partnerScope, or(ilike(partners.name, contains), ilike(partners.slug, contains)))).orderBy(...ranked(partners.name, q)).limit(PER_KIND)
      .then(rows => rows.map((r): SearchHit => ({ kind: 'partner', id: r.id, title: r.name, detail: r.slug, to: `/console/partners/${r.id}` }))))
    if (WEBHOOK_ID_START.test(q)) {
      found.push(db.select({ id: deliveries.id, eventType: deliveries.eventType, status: deliveries.status, url: webhookEndpoints.url, partnerId: partners.id, partner: partners.name })
        .from(deliveries).innerJoin(webhookEndpoints, eq(webhookEndpoints.id, deliveries.endpointId)).innerJoin(partners, eq(partners.id, webhookEndpoints.partnerId))
        .where(and(partnerScope, sql`${deliveries.id}::text like ${`${likeEscaped(q.toLowerCase())}%`}`)).orderBy(desc(deliveries.createdAt)).limit(PER_KIND)
        .then(rows => rows.map((r): SearchHit => ({ kind: 'delivery', id: r.id, title: r.id, detail: `${r.eventType} · ${r.status} · ${r.url} · ${r.partner}`, to: `/console/partners/${r.partnerId}/deliveries/${r.id}` }))))
    }
  }

  if (can(user.role, 'users:read')) {
    found.push(db.select({ id: users.id, name: users.name, email: users.email, role: users.role, status: users.status }).from(users)
      .where(or(ilike(users.name, contains), ilike(users.email, contains))).orderBy(...ranked(users.name, q)).limit(PER_KIND)
      .then(rows => rows.map((r): SearchHit => ({ kind: 'user', id: r.id, title: r.name, detail: `${r.email} · ${r.role}${r.status === 'disabled' ? ' · disabled' : ''}`, to: `/console/users?q=${encodeURIComponent(r.email)}` }))))
  }

  return (await Promise.all(found)).flat()
}
