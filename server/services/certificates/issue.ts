import { createHash } from 'node:crypto'
import { and, desc, eq, gt, inArray, sql } from 'drizzle-orm'
import { CompactSign } from 'jose'
import { acquisitions, certificates, results, sequences } from '../../database/schema'
import { grantedLabIds, hubSigningKey } from '../partners'
import { canonicalJson } from './canonical'
import { resultCertificateDocument, sequenceCertificateDocument, type CertificateHead } from './document'

// Certificates are issued once per released version (results) or released sequence, and
// kept: the canonical bytes, the detached JWS and the key id. A correction is a new result
// version, so it gets a certificate of its own; the old one stays verifiable and says, when
// checked, that it was corrected.

export type Certificate = typeof certificates.$inferSelect
type Subject = Certificate['subject']

/** The hub's name in a certificate: its public URL. */
const issuer = () => useRuntimeConfig().appUrl

/**
 * A detached JWS (RFC 7515 Appendix F) over the UTF-8 bytes of `canonical`: the compact
 * serialisation with its payload part left empty. The payload stays base64url-encoded in the
 * signing input (no RFC 7797 `b64: false`), so any JOSE library verifies it once the payload
 * is put back.
 */
export async function signDetached(canonical: string): Promise<{ jws: string, kid: string }> {
  const key = await hubSigningKey()
  const alg = String(key.publicJwk.alg ?? 'ES256')
  const compact = await new CompactSign(new TextEncoder().encode(canonical))
    .setProtectedHeader({ alg, kid: key.kid, typ: 'JOSE', cty: 'json' }).sign(key.privateKey)
  const [header, , signature] = compact.split('.')
  return { jws: `${header}..${signature}`, kid: key.kid }
}

export const sha256Hex = (text: string) => createHash('sha256').update(text, 'utf8').digest('hex')

/** The next number of the year: AW-<year>-<6 digits>, counted under an advisory lock held to commit. */
async function nextNumber(db: Queryable, year: number): Promise<string> {
  const prefix = `AW-${year}-`
  // split_part, not substring(… from $1): with an untyped parameter PostgreSQL picks the
  // regular-expression form of substring, which matched nothing and numbered every
  // certificate after the first 1 again (a unique violation).
  const [row] = await db.execute<{ n: number | null }>(sql`
    select max(split_part(${certificates.number}, '-', 3)::int) as n from ${certificates} where ${certificates.number} like ${`${prefix}%`}`)
  return `${prefix}${String(Number(row?.n ?? 0) + 1).padStart(6, '0')}`
}

/**
 * Issues the certificate of a released result (by result id) or sequence (by Arcwise's id),
 * or answers the one already issued. In `db`'s transaction when it is one (the review
 * service can issue in the same transaction that releases; the seed calls it directly).
 * A subject that is not released is 409 `not-released`.
 */
export async function issueCertificate(db: Queryable, audit: AuditContext, subject: Subject, id: string): Promise<Certificate> {
  return db.transaction(async (tx) => {
    // One issuer at a time: the number is the year's next, and a subject gets one certificate.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext('arcwise:certificates'))`)
    const existing = await tx.query.certificates.findFirst({ where: and(eq(certificates.subject, subject), eq(certificates.subjectId, id)) })
    if (existing) return existing
    const state = subject === 'result' ? await lockPublishedResult(tx, id) : await lockSequence(tx, id)
    const issuedAt = new Date()
    const head: CertificateHead = { number: await nextNumber(tx, issuedAt.getUTCFullYear()), issuedAt: issuedAt.toISOString(), issuer: issuer() }
    const document = subject === 'result' ? await resultCertificateDocument(tx, id, head) : await sequenceCertificateDocument(tx, id, head)
    if (!document) throw problem(409, 'nothing-to-certify', `The ${subject} has no outcome to certify.`)
    const canonical = canonicalJson(document)
    const { jws, kid } = await signDetached(canonical)
    const [row] = await tx.insert(certificates).values({ number: head.number, labId: state.labId, subject, subjectId: id, canonical, jws, kid, issuedBy: audit.actor.id, issuedAt }).returning()
    await recordAudit(tx, { ...audit, action: 'certificate.issued', targetType: 'certificate', targetId: row!.id, detail: { number: head.number, subject, subjectId: id, kid, sha256: sha256Hex(canonical) } })
    return row!
  })
}

/**
 * The result to certify, held FOR SHARE (its acquisition's row too) until the certificate
 * commits: a retraction, or the release of a newer version (both lock those rows for
 * update), waits for it, and one that committed first is seen here. It must still be the
 * acquisition's published version: released, with no newer version released or retracted.
 */
async function lockPublishedResult(tx: Queryable, id: string) {
  await tx.execute(sql`select 1 from ${acquisitions} where id = (select acquisition_id from ${results} where id = ${id}::uuid) for share`)
  const [row] = await tx.select({ reviewState: results.reviewState, labId: results.labId, acquisitionId: results.acquisitionId, version: results.version })
    .from(results).where(eq(results.id, id)).for('share')
  if (!row) throw problem(404, 'certificate-subject-not-found', 'No result with this id.')
  if (row.reviewState !== 'released') throw notReleased('result', row.reviewState)
  const [newer] = await tx.select({ version: results.version }).from(results)
    .where(and(eq(results.acquisitionId, row.acquisitionId), gt(results.version, row.version), inArray(results.reviewState, ['released', 'retracted']))).limit(1)
  if (newer) throw problem(409, 'superseded', `Version ${newer.version} of this acquisition replaced this result: certify that one.`)
  return row
}

/** The sequence to certify, held FOR SHARE until the certificate commits (a retraction waits); it must be released. */
async function lockSequence(tx: Queryable, id: string) {
  const [row] = await tx.select({ reviewState: sequences.reviewState, labId: sequences.labId }).from(sequences).where(eq(sequences.id, id)).for('share')
  if (!row) throw problem(404, 'certificate-subject-not-found', 'No sequence with this id.')
  if (row.reviewState !== 'released') throw notReleased('sequence', row.reviewState)
  return row
}

function notReleased(subject: Subject, state: string) {
  return problem(409, 'not-released', `This ${subject} is ${state}: a certificate is issued only once the lab releases it.`)
}

/** Who asks for a certificate: a lab (its key or a console user scoped to it) or a partner through its grants. */
export type CertificateReader = { labId: string } | { partnerId: string }

/**
 * The certificate of an acquisition's published result (its newest released or retracted
 * version), issued now if it was released but never asked for. A lab that holds or rejected
 * it is answered 409 `not-released`; a partner 404, as if it were not there (partners never
 * learn of unreleased results).
 */
export async function resultCertificate(reader: CertificateReader, audit: AuditContext, acquisitionId: string): Promise<Certificate> {
  const labIds = 'labId' in reader
    ? [reader.labId]
    : await grantedLabIds(reader.partnerId)
  const [acq] = labIds.length ? await useDb().select({ id: acquisitions.id }).from(acquisitions).where(and(eq(acquisitions.id, acquisitionId), inArray(acquisitions.labId, labIds))) : []
  const notFound = () => problem(404, 'result-not-found', 'No released result with this id among the results you may read.')
  if (!acq) throw notFound()
  const [published] = await useDb().select({ id: results.id, reviewState: results.reviewState }).from(results)
    .where(and(eq(results.acquisitionId, acq.id), inArray(results.reviewState, ['released', 'retracted']))).orderBy(desc(results.version)).limit(1)
  if (!published) {
    if ('partnerId' in reader) throw notFound()
    const [newest] = await useDb().select({ reviewState: results.reviewState }).from(results).where(eq(results.acquisitionId, acq.id)).orderBy(desc(results.version)).limit(1)
    throw notReleased('result', newest?.reviewState ?? 'held')
  }
  const issued = await useDb().query.certificates.findFirst({ where: and(eq(certificates.subject, 'result'), eq(certificates.subjectId, published.id)) })
  if (issued) return issued
  // Retracted before anyone asked: nothing stands to certify.
  if (published.reviewState !== 'released') throw problem(409, 'retracted', 'This result was retracted before a certificate was issued for it.')
  return issueCertificate(useDb(), audit, 'result', published.id)
}

/** The certificate of one of the lab's sequences, by the lab's id for it or by Arcwise's id. */
export async function sequenceCertificate(labId: string, audit: AuditContext, by: { sequenceId: string } | { id: string }): Promise<Certificate> {
  const row = await useDb().query.sequences.findFirst({
    where: and(eq(sequences.labId, labId), 'id' in by ? eq(sequences.id, by.id) : eq(sequences.externalId, by.sequenceId)),
    columns: { id: true, reviewState: true },
  })
  if (!row) throw problem(404, 'sequence-not-found', 'No such sequence in your lab.')
  const issued = await useDb().query.certificates.findFirst({ where: and(eq(certificates.subject, 'sequence'), eq(certificates.subjectId, row.id)) })
  if (issued) return issued
  if (row.reviewState !== 'released') throw notReleased('sequence', row.reviewState)
  return issueCertificate(useDb(), audit, 'sequence', row.id)
}
