import { and, asc, desc, eq, inArray } from 'drizzle-orm'
import { coverageFactor, type EngineResult, type SequenceOutcome } from '#shared/engine'
import { CAUTION, CAUTION_SHORT } from '#shared/caution'
import { CERTIFICATE_FORMAT, type CertificateHead, type CertifiedValue, type Review, type ResultCertificateDocument, type SequenceCertificateDocument } from './types'
import { acquisitions, calibrations, geometryVersions, instruments, labs, methods, results, sequenceItems, sequences, users } from '../../database/schema'

// What a certificate of analysis certifies, as one JSON document: the released result (or
// sequence outcome) with everything a reader needs to judge it — lab, instrument, versions,
// values with u, k and U, the review that released it, and the caution. Its RFC 8785 form is
// what the hub signs and stores byte for byte (canonical.ts); the PDF is drawn from it.

export * from './types'

/**
 * k for a value the engine gives as a standard uncertainty: Student's t at 95.45 % for the
 * effective degrees of freedom when they are known (GUM G.4, static cycle ratios), else 2,
 * the level of approximately 95 % for a normal output (JCGM 100:2008, 6.3.3).
 */
function certified(value: number, u: number | null, unit: string, effectiveDof?: number): CertifiedValue {
  const k = effectiveDof && Number.isFinite(effectiveDof) && effectiveDof < 1e6 ? Number(coverageFactor(effectiveDof).toFixed(3)) : 2
  return { value, u, k, U: u === null ? null : u * k, unit }
}

const reviewerName = async (db: Queryable, id: string | null) => (id ? (await db.query.users.findFirst({ where: eq(users.id, id), columns: { name: true, email: true } })) : undefined)
const review = async (db: Queryable, row: { reviewState: string, releasedAt: Date | null, reviewedBy: string | null }, version: number, supersedes: string | null, correctionReason: string | null): Promise<Review> => {
  const person = await reviewerName(db, row.reviewedBy)
  return {
    state: row.reviewState, releasedAt: row.releasedAt?.toISOString() ?? null,
    // null: released automatically by the lab's rule, with no person.
    reviewedBy: row.reviewedBy ? (person?.name || person?.email || 'a lab reviewer') : null,
    version, supersedes, correctionReason,
  }
}

/** The result row (any version) with what its certificate names; undefined when there is none. */
export async function resultCertificateDocument(db: Queryable, resultId: string, head: CertificateHead): Promise<ResultCertificateDocument | undefined> {
  const [row] = await db.select({ res: results, acq: { id: acquisitions.id, externalId: acquisitions.externalId, acquiredAt: acquisitions.acquiredAt, sampleRef: acquisitions.sampleRef },
    lab: { slug: labs.slug, name: labs.name, site: labs.site }, instrument: { slug: instruments.slug, name: instruments.name },
    geometry: geometryVersions.version, calibration: calibrations.version })
    .from(results).innerJoin(acquisitions, eq(acquisitions.id, results.acquisitionId))
    .innerJoin(labs, eq(labs.id, results.labId)).innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .innerJoin(geometryVersions, eq(geometryVersions.id, results.geometryVersionId)).leftJoin(calibrations, eq(calibrations.id, results.calibrationId))
    .where(eq(results.id, resultId)).limit(1)
  if (!row) return undefined
  const summary = row.res.summary as unknown as EngineResult
  // A result belongs to a method only through the sequence it was measured in (none otherwise).
  const [method] = await db.select({ name: methods.name, version: methods.version }).from(sequenceItems)
    .innerJoin(sequences, eq(sequences.id, sequenceItems.sequenceId)).innerJoin(methods, eq(methods.id, sequences.methodId))
    .where(eq(sequenceItems.acquisitionId, row.acq.id)).limit(1)
  return {
    format: CERTIFICATE_FORMAT,
    certificate: head,
    subject: { type: 'result', id: row.res.id, acquisitionId: row.acq.id, version: row.res.version },
    lab: row.lab,
    instrument: row.instrument,
    acquisition: { runId: row.acq.externalId, acquiredAt: row.acq.acquiredAt.toISOString(), sampleRef: row.acq.sampleRef },
    versions: { geometry: [row.geometry], calibration: row.calibration === null ? [] : [row.calibration], method: method ?? null, engine: [row.res.engineVersion], constants: [summary.constants] },
    calibrated: summary.calibrated,
    review: await review(db, row.res, row.res.version, row.res.supersedes, row.res.correctionReason),
    values: {
      ratios: summary.ratios.map(r => ({
        id: r.id, numerator: r.numerator, denominator: r.denominator,
        ratio: certified(r.ratio, r.ratioU, '1', r.cycles?.effectiveDof),
        delta: { ...certified(r.deltaPermil, r.deltaU, '‰', r.cycles?.effectiveDof), name: r.deltaName, scale: r.standard, uWithReference: r.deltaUWithReference },
      })),
      peaks: summary.peaks.map(p => ({
        species: p.assignment?.species ?? null, z: p.assignment?.z ?? null,
        mz: certified(p.centroid, p.centroidU, 'u/e'),
        area: certified(p.area, p.areaU, summary.mode === 'sweep' ? `${summary.detectorUnit}·(u/e)` : summary.detectorUnit),
      })),
    },
    qc: summary.qc.map(f => ({ code: f.code, message: f.message })),
    caution: { short: CAUTION_SHORT, text: CAUTION },
  }
}

/** A sequence with its outcome and what its certificate names; undefined when there is none. */
export async function sequenceCertificateDocument(db: Queryable, sequenceUuid: string, head: CertificateHead): Promise<SequenceCertificateDocument | undefined> {
  const [row] = await db.select({ seq: sequences, lab: { slug: labs.slug, name: labs.name, site: labs.site }, instrument: { slug: instruments.slug, name: instruments.name }, method: { name: methods.name, version: methods.version } })
    .from(sequences).innerJoin(labs, eq(labs.id, sequences.labId)).innerJoin(instruments, eq(instruments.id, sequences.instrumentId))
    .leftJoin(methods, eq(methods.id, sequences.methodId)).where(eq(sequences.id, sequenceUuid)).limit(1)
  if (!row?.seq.outcome) return undefined
  const outcome = row.seq.outcome as SequenceOutcome
  const members = await db.select({ position: sequenceItems.position, acquisitionId: sequenceItems.acquisitionId, runId: acquisitions.externalId, sampleRef: acquisitions.sampleRef })
    .from(sequenceItems).innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId)).where(eq(sequenceItems.sequenceId, row.seq.id)).orderBy(asc(sequenceItems.position))
  // The versions every acquisition's result was computed with (the newest version of each).
  const used = members.length
    ? await db.selectDistinctOn([results.acquisitionId], { acquisitionId: results.acquisitionId, engine: results.engineVersion, summary: results.summary, geometry: geometryVersions.version, calibration: calibrations.version })
      .from(results).innerJoin(geometryVersions, eq(geometryVersions.id, results.geometryVersionId)).leftJoin(calibrations, eq(calibrations.id, results.calibrationId))
      .where(inArray(results.acquisitionId, members.map(m => m.acquisitionId))).orderBy(results.acquisitionId, desc(results.version))
    : []
  const distinct = <T>(values: T[]) => [...new Set(values)].sort()
  const byPosition = new Map(members.map(m => [m.position, m]))
  return {
    format: CERTIFICATE_FORMAT,
    certificate: head,
    subject: { type: 'sequence', id: row.seq.id, sequenceId: row.seq.externalId },
    lab: row.lab,
    instrument: row.instrument,
    sequence: { gas: outcome.gas, acquisitions: members.length, processedAt: row.seq.processedAt?.toISOString() ?? null, accepted: outcome.accepted },
    versions: {
      geometry: distinct(used.map(u => u.geometry)), calibration: distinct(used.flatMap(u => (u.calibration === null ? [] : [u.calibration]))),
      method: row.method?.name ? { name: row.method.name, version: row.method.version! } : null,
      engine: distinct(used.map(u => u.engine)), constants: distinct(used.map(u => String((u.summary as { constants?: string }).constants ?? ''))),
    },
    calibrated: used.length > 0 && used.every(u => (u.summary as { calibrated?: boolean }).calibrated === true),
    review: await review(db, row.seq, 1, null, null),
    values: {
      samples: outcome.items.filter(i => i.role === 'sample').map(i => ({
        position: i.position, runId: byPosition.get(i.position)?.runId ?? '', sampleRef: byPosition.get(i.position)?.sampleRef ?? null,
        values: Object.entries(i.final).map(([quantity, v]) => ({ quantity, scale: v.scale, value: v.value, u: v.u, k: v.k, U: v.u * v.k, unit: quantity.startsWith('δ') ? '‰' : '1' })),
      })),
      normalisation: outcome.normalisation.map(n => ({
        quantity: n.quantity, scale: n.scale, slope: certified(n.slope.value, n.slope.u, '1'), intercept: certified(n.intercept.value, n.intercept.u, n.quantity.startsWith('δ') ? '‰' : '1'),
        anchors: n.anchors.map(a => a.material),
      })),
    },
    qc: outcome.flags.map(f => ({ code: f.code, message: f.message })),
    caution: { short: CAUTION_SHORT, text: CAUTION },
  }
}

/** The review columns of the subject a certificate names, for its status now. */
export async function subjectState(subject: 'result' | 'sequence', id: string) {
  if (subject === 'sequence') {
    const row = await useDb().query.sequences.findFirst({ where: eq(sequences.id, id), columns: { reviewState: true, retractedAt: true, retractionReason: true } })
    return row ? { ...row, correctedBy: null } : undefined
  }
  const row = await useDb().query.results.findFirst({ where: eq(results.id, id), columns: { acquisitionId: true, version: true, reviewState: true, retractedAt: true, retractionReason: true } })
  if (!row) return undefined
  // Corrected: a later version of the same acquisition has reached partners (released or retracted since).
  const [later] = await useDb().select({ id: results.id, version: results.version, correctionReason: results.correctionReason, releasedAt: results.releasedAt }).from(results)
    .where(and(eq(results.acquisitionId, row.acquisitionId), inArray(results.reviewState, ['released', 'retracted'])))
    .orderBy(desc(results.version)).limit(1)
  return {
    reviewState: row.reviewState, retractedAt: row.retractedAt, retractionReason: row.retractionReason,
    correctedBy: later && later.version > row.version ? { resultId: later.id, version: later.version, reason: later.correctionReason, releasedAt: later.releasedAt?.toISOString() ?? null } : null,
  }
}
