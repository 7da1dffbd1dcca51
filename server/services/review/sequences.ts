import { and, asc, eq, isNull, ne, sql } from 'drizzle-orm'
import { acquisitions, instruments, labs, methods, results, sequenceItems, sequences, users } from '../../database/schema'
import { kickDeliveries, recordLabEvent } from '../delivery'
import { SEQUENCE_EVENT, sequenceEventData } from '../sequences'

// Review of sequences' outcomes, as for results (results.ts): a processed sequence is held
// unless its method's (else the lab's) rule released it; `sequence.processed` reaches
// partners when a reviewer releases it.

async function lockSequence(tx: Queryable, labId: string, sequenceId: string) {
  const [row] = await tx.select({ seq: sequences, fourEyes: labs.fourEyes, methodCreatedBy: methods.createdBy }).from(sequences)
    .innerJoin(labs, eq(labs.id, sequences.labId))
    .leftJoin(methods, eq(methods.id, sequences.methodId))
    .where(and(eq(sequences.id, sequenceId), eq(sequences.labId, labId))).for('update', { of: sequences })
  if (!row) throw problem(404, 'sequence-not-found', 'No such sequence in this lab.')
  return row
}

/**
 * The first member (by position) whose result, as the sequence used it (the newest version),
 * is not released: a sequence's outcome stands on its members' results, so it is released
 * only once they all are.
 */
async function firstUnreleasedMember(tx: Queryable, sequenceId: string) {
  const [member] = await tx.select({ position: sequenceItems.position, runId: acquisitions.externalId, state: results.reviewState }).from(sequenceItems)
    .innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt), isNull(results.supersededBy)))
    .where(and(eq(sequenceItems.sequenceId, sequenceId), ne(results.reviewState, 'released')))
    .orderBy(asc(sequenceItems.position)).limit(1)
  return member
}

function audited(row: typeof sequences.$inferSelect) {
  return { labId: row.labId, sequenceId: row.externalId }
}

/** Releases a held, processed sequence: partners on result-event v2 or later receive `sequence.processed`. */
export async function releaseSequence(audit: AuditContext, labId: string, sequenceId: string, comment?: string | null) {
  const outcome = await useDb().transaction(async (tx) => {
    const row = await lockSequence(tx, labId, sequenceId)
    if (row.seq.status !== 'processed') throw problem(409, 'sequence-not-processed', `This sequence is ${row.seq.status}; only a processed sequence can be released.`)
    if (row.seq.reviewState !== 'held') throw problem(409, 'not-held', `This sequence is ${row.seq.reviewState}; only a held sequence can be released.`)
    if (row.fourEyes && row.methodCreatedBy && row.methodCreatedBy === audit.actor.id) {
      throw problem(403, 'four-eyes', 'You registered the method version this sequence was processed under; under the lab\'s four-eyes rule another reviewer must release it.')
    }
    const unreleased = await firstUnreleasedMember(tx, sequenceId)
    if (unreleased) throw problem(409, 'members-not-released', `The result of position ${unreleased.position} (run ${unreleased.runId}) is ${unreleased.state}; release every member's result before the sequence.`)
    const [seq] = await tx.update(sequences).set({ reviewState: 'released', reviewedBy: audit.actor.id, reviewedAt: sql`now()`, reviewComment: comment ?? null, releasedAt: sql`now()` })
      .where(eq(sequences.id, sequenceId)).returning()
    const [reviewer] = await tx.select({ name: users.name }).from(users).where(eq(users.id, audit.actor.id ?? '00000000-0000-0000-0000-000000000000'))
    // result-event v1 does not describe this message: endpoints on v2 or later only.
    await recordLabEvent(tx, labId, SEQUENCE_EVENT, await sequenceEventData(seq!, reviewer?.name ?? null), 2)
    await recordAudit(tx, { ...audit, action: 'sequence.released', targetType: 'sequence', targetId: sequenceId, detail: { ...audited(seq!), comment: comment ?? null } })
    return { sequenceId, state: seq!.reviewState }
  })
  kickDeliveries()
  return outcome
}

/** A reviewer refuses a held sequence's outcome (the comment says why); partners never receive it. */
export async function rejectSequence(audit: AuditContext, labId: string, sequenceId: string, comment: string) {
  return useDb().transaction(async (tx) => {
    const row = await lockSequence(tx, labId, sequenceId)
    if (row.seq.status !== 'processed' || row.seq.reviewState !== 'held') throw problem(409, 'not-held', `This sequence is ${row.seq.status === 'processed' ? row.seq.reviewState : row.seq.status}; only a held, processed sequence can be rejected.`)
    const [seq] = await tx.update(sequences).set({ reviewState: 'rejected', reviewedBy: audit.actor.id, reviewedAt: sql`now()`, reviewComment: comment })
      .where(eq(sequences.id, sequenceId)).returning()
    await recordAudit(tx, { ...audit, action: 'sequence.rejected', targetType: 'sequence', targetId: sequenceId, detail: { ...audited(seq!), comment } })
    return { sequenceId, state: seq!.reviewState }
  })
}

/**
 * Withdraws a released sequence's outcome with a reason: it stays readable, marked retracted.
 * (No partner event type describes a sequence's retraction yet; the audit log and the
 * sequence's view carry it.)
 */
export async function retractSequence(audit: AuditContext, labId: string, sequenceId: string, reason: string) {
  return useDb().transaction(async (tx) => {
    const row = await lockSequence(tx, labId, sequenceId)
    if (row.seq.reviewState !== 'released') throw problem(409, 'not-released', `This sequence is ${row.seq.reviewState}; only a released sequence can be retracted.`)
    const [seq] = await tx.update(sequences).set({ reviewState: 'retracted', retractedBy: audit.actor.id, retractedAt: sql`now()`, retractionReason: reason })
      .where(eq(sequences.id, sequenceId)).returning()
    await recordAudit(tx, { ...audit, action: 'sequence.retracted', targetType: 'sequence', targetId: sequenceId, detail: { ...audited(seq!), reason } })
    return { sequenceId, state: seq!.reviewState }
  })
}

/** The lab's processed sequences waiting for review, oldest first. */
export async function heldSequences(labId: string, limit: number) {
  const rows = await useDb().select({
    id: sequences.id, sequenceId: sequences.externalId, instrument: instruments.slug, processedAt: sequences.processedAt, flagged: sequences.flagged,
    accepted: sql<boolean | null>`(${sequences.outcome}->>'accepted')::boolean`, methodVersion: methods.version,
    flags: sql<string[]>`coalesce((select array_agg(distinct f->>'code') from jsonb_array_elements(${sequences.outcome}->'flags') f), '{}')`,
  }).from(sequences)
    .innerJoin(instruments, eq(instruments.id, sequences.instrumentId))
    .leftJoin(methods, eq(methods.id, sequences.methodId))
    .where(and(eq(sequences.labId, labId), eq(sequences.status, 'processed'), eq(sequences.reviewState, 'held')))
    .orderBy(asc(sequences.processedAt), asc(sequences.id)).limit(limit)
  return rows.map(r => ({ ...r, processedAt: r.processedAt?.toISOString() ?? null }))
}
