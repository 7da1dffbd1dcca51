import { createHash } from 'node:crypto'
import { and, eq, inArray, sql } from 'drizzle-orm'
import type { H3Error } from 'h3'
import type { SequenceInput, SequenceMemberInput, SequenceView } from '#shared/schemas/sequences'
import { acquisitionRuns, acquisitions, sequenceItems, sequences } from '../../database/schema'
import { acceptAcquisition } from '../ingest'
import { labInstrument, methodInForce, methodVersion } from './methods'
import { materialsAt } from './materials'
import { processSequence } from './processing'
import { findSequence, sequenceViewOf } from './views'

// Taking sequences in: a whole sequence at once, or opened with a declared length and filled
// acquisition by acquisition (in any order), then closed by the lab or by its last position.
// Everything a request can be refused for is checked before anything is stored; each
// acquisition goes through the same ingest as POST /api/v1/acquisitions.

/** The lab key a sequence is posted with (its id scopes the acquisitions' idempotency). */
export interface SequenceKey { labId: string }

type Answer = { status: 200 | 201, body: SequenceView }

/** SHA-256 of a request body, for Idempotency-Key and replays. */
export const sequenceBodyHash = (value: unknown) => createHash('sha256').update(JSON.stringify(value)).digest('hex')

/** The problem an acquisition's ingest raised, with each field's path under `prefix`. */
function underPath(error: unknown, prefix: string): unknown {
  const e = error as H3Error<{ problem?: { type: string, detail?: string, errors?: { path: string, message: string }[] } }>
  const doc = e?.data?.problem
  if (!doc) return error
  const errors = doc.errors?.map(f => ({ path: `${prefix}.${f.path}`, message: f.message }))
  return problem(e.statusCode, doc.type.replace('urn:arcwise:problem:', ''), errors ? errors.map(f => `${f.path}: ${f.message}`).join('; ') : doc.detail, errors ? { errors } : {})
}

/**
 * A processed sequence answers with its view; one whose processing failed answers a problem
 * saying why (the sequence and its acquisitions stay stored, status `failed`).
 */
function answer(status: 200 | 201, view: SequenceView): Answer {
  if (view.status === 'failed' && view.failure) {
    const path = view.failure.field ?? 'method'
    throw problem(422, 'sequence-not-processed', `Sequence ${view.sequenceId} was stored but could not be processed: ${view.failure.message}`, { errors: [{ path, message: view.failure.message }] })
  }
  return { status, body: view }
}

/** Standards must name a material known at their acquisition's time; checked before anything is stored. */
async function checkMaterials(labId: string, members: SequenceMemberInput[], path: (i: number) => string) {
  const uses = members.map((m, i) => ({ i, material: m.material, at: new Date(m.acquisition.acquiredAt) })).filter(u => u.material)
  const { missing } = await materialsAt(labId, uses.map(u => ({ material: u.material!, at: u.at })))
  if (missing.length) {
    const use = uses[missing[0]!]!
    throw fieldProblem(path(use.i), `no reference material or working standard "${use.material}" of your lab valid at ${use.at.toISOString()}`, 422, 'unknown-material')
  }
}

/**
 * The acquisition's created_at (the partition key its sequence item's foreign key carries),
 * copied in SQL by the insert itself: a JS Date would drop its microseconds.
 */
const createdAtOf = (acquisitionId: string) => sql<Date>`(select a.created_at from ${acquisitions} a where a.id = ${acquisitionId}::uuid)`

/** Acquisitions already stored under these run ids that belong to another sequence. */
async function checkNotInAnotherSequence(labId: string, runIds: string[], sequenceId: string | null, path: (i: number) => string) {
  if (!runIds.length) return
  const rows = await useDb().select({ runId: acquisitionRuns.externalId, sequenceId: sequenceItems.sequenceId }).from(acquisitionRuns)
    .innerJoin(sequenceItems, eq(sequenceItems.acquisitionId, acquisitionRuns.acquisitionId))
    .where(and(eq(acquisitionRuns.labId, labId), inArray(acquisitionRuns.externalId, runIds)))
  const taken = rows.find(r => r.sequenceId !== sequenceId)
  if (taken) throw fieldProblem(path(runIds.indexOf(taken.runId)), 'this run belongs to another sequence', 409, 'run-in-another-sequence')
}

/**
 * Opens a sequence, with as many of its acquisitions as the request carries. A whole sequence
 * (no declared length) or one whose declared length the request fills is closed and processed
 * at once. The same sequence id with the same body answers the stored sequence; with another
 * body, 409.
 */
export async function openSequence(key: SequenceKey, input: SequenceInput, requestId?: string): Promise<Answer> {
  const hash = sequenceBodyHash(input)
  const existing = await findSequence(key.labId, input.sequenceId)
  if (existing) return replayOrConflict(existing, hash)
  const instrument = await labInstrument(key.labId, input.instrument)
  const runIds = input.acquisitions.map(a => a.acquisition.runId)
  const twice = runIds.findIndex((r, i) => runIds.indexOf(r) !== i)
  if (twice >= 0) throw fieldProblem(`acquisitions.${twice}.acquisition.runId`, `run ${runIds[twice]} is given twice in this sequence`)
  if (input.methodVersion !== undefined) {
    if (!await methodVersion(instrument.id, input.methodVersion)) throw fieldProblem('methodVersion', `instrument ${instrument.slug} has no method version ${input.methodVersion}`)
  }
  else {
    const first = input.acquisitions.reduce<Date | null>((m, a) => { const t = new Date(a.acquisition.acquiredAt); return !m || t < m ? t : m }, null) ?? new Date()
    if (!await methodInForce(instrument.id, first)) throw fieldProblem('instrument', `has no method in force at ${first.toISOString()}; register the instrument's method first`, 422, 'no-method')
  }
  await checkMaterials(key.labId, input.acquisitions, i => `acquisitions.${i}.material`)
  await checkNotInAnotherSequence(key.labId, runIds, null, i => `acquisitions.${i}.acquisition.runId`)

  const [row] = await useDb().insert(sequences).values({
    labId: key.labId, instrumentId: instrument.id, externalId: input.sequenceId, declaredLength: input.length ?? input.acquisitions.length,
    requestedMethodVersion: input.methodVersion ?? null, bodyHash: hash,
  }).onConflictDoNothing().returning()
  if (!row) {
    // Opened by another request at the same moment: replay or conflict as if it had come first.
    const winner = await findSequence(key.labId, input.sequenceId)
    if (winner) return replayOrConflict(winner, hash)
    throw problem(409, 'sequence-id-conflict', 'This sequence id is being opened by another request; retry.')
  }
  // Each acquisition goes through the ingest of POST /api/v1/acquisitions; those accepted in
  // one turn of the event loop share one write (group commit).
  const accepted = await Promise.allSettled(input.acquisitions.map(a => acceptAcquisition(key, a.acquisition, { requestId })))
  const members = accepted.flatMap((r, i) => r.status === 'fulfilled' ? [{ member: input.acquisitions[i]!, acquisitionId: r.value.body.id }] : [])
  if (members.length) {
    await useDb().insert(sequenceItems).values(members.map(({ member, acquisitionId }) => ({
      sequenceId: row.id, position: member.position, acquisitionId, acquisitionCreatedAt: createdAtOf(acquisitionId), role: member.role, material: member.material ?? null,
    })))
  }
  const refused = accepted.findIndex(r => r.status === 'rejected')
  if (refused >= 0) {
    // The sequence stays open with what was accepted: nothing accepted is lost, and the lab
    // posts the refused acquisition again at its position once corrected.
    throw underPath((accepted[refused] as PromiseRejectedResult).reason, `acquisitions.${refused}.acquisition`)
  }
  return answer(201, await closeIfFull(row.id))
}

function replayOrConflict(existing: typeof sequences.$inferSelect, hash: string): Promise<Answer> {
  if (existing.bodyHash !== hash) throw fieldProblem('sequenceId', 'this sequence id was opened before with a different body', 409, 'sequence-id-conflict')
  return sequenceViewOf(existing).then(view => answer(200, view))
}

/** Closes the sequence when its declared length is filled, and processes it; the view after. */
async function closeIfFull(sequenceId: string): Promise<SequenceView> {
  const [closed] = await useDb().update(sequences).set({ status: 'closed', closedAt: sql`now()` })
    .where(and(eq(sequences.id, sequenceId), eq(sequences.status, 'open'),
      sql`${sequences.declaredLength} <= (select count(*) from ${sequenceItems} si where si.sequence_id = ${sequences.id})`))
    .returning()
  if (closed) await processSequence(closed)
  const row = await useDb().query.sequences.findFirst({ where: eq(sequences.id, sequenceId) })
  return sequenceViewOf(row!)
}

/**
 * Adds one acquisition at its position (in any order). The same run at the same position
 * again answers the sequence (a replay); another run at a taken position is 409. The last
 * position of the declared length closes and processes the sequence.
 */
export async function addToSequence(key: SequenceKey, externalId: string, member: SequenceMemberInput, requestId?: string): Promise<Answer> {
  const seq = await findSequence(key.labId, externalId)
  if (!seq) throw problem(404, 'sequence-not-found', 'No sequence with this id in your lab; open it first with POST /api/v1/sequences.')
  const [atPosition] = await useDb().select({ runId: acquisitions.externalId, bodyHash: acquisitions.bodyHash }).from(sequenceItems)
    .innerJoin(acquisitions, eq(acquisitions.id, sequenceItems.acquisitionId))
    .where(and(eq(sequenceItems.sequenceId, seq.id), eq(sequenceItems.position, member.position)))
  if (atPosition) {
    if (atPosition.runId === member.acquisition.runId && atPosition.bodyHash === bodyHash(member.acquisition)) return answer(200, await sequenceViewOf(seq))
    throw fieldProblem('position', `position ${member.position} is taken by run ${atPosition.runId}`, 409, 'position-taken')
  }
  if (seq.status !== 'open') throw problem(409, 'sequence-closed', `Sequence ${externalId} is ${seq.status}; it takes no more acquisitions.`)
  const instrument = await labInstrument(key.labId, member.acquisition.instrument, 'acquisition.instrument')
  if (instrument.id !== seq.instrumentId) throw fieldProblem('acquisition.instrument', 'must be the sequence\'s instrument')
  if (seq.declaredLength !== null && member.position > seq.declaredLength) throw fieldProblem('position', `is past the declared length ${seq.declaredLength}`)
  await checkMaterials(key.labId, [member], () => 'material')
  await checkNotInAnotherSequence(key.labId, [member.acquisition.runId], seq.id, () => 'acquisition.runId')

  let acquisitionId: string
  try { acquisitionId = (await acceptAcquisition(key, member.acquisition, { requestId })).body.id }
  catch (error) { throw underPath(error, 'acquisition') }
  const [inserted] = await useDb().insert(sequenceItems).values({ sequenceId: seq.id, position: member.position, acquisitionId, acquisitionCreatedAt: createdAtOf(acquisitionId), role: member.role, material: member.material ?? null })
    .onConflictDoNothing().returning({ position: sequenceItems.position })
  if (!inserted) throw fieldProblem('position', `position ${member.position} was taken by another request at the same moment; run ${member.acquisition.runId} is stored as an acquisition outside the sequence`, 409, 'position-taken')
  return answer(201, await closeIfFull(seq.id))
}

/**
 * Closes an open sequence as it stands and processes it. Closing a sequence that is closed
 * already answers it as it is.
 */
export async function closeSequence(key: SequenceKey, externalId: string): Promise<Answer> {
  const seq = await findSequence(key.labId, externalId)
  if (!seq) throw problem(404, 'sequence-not-found', 'No sequence with this id in your lab.')
  if (seq.status !== 'open') return answer(200, await sequenceViewOf(seq))
  const [closed] = await useDb().update(sequences).set({ status: 'closed', closedAt: sql`now()` })
    .where(and(eq(sequences.id, seq.id), eq(sequences.status, 'open'), sql`exists (select 1 from ${sequenceItems} si where si.sequence_id = ${sequences.id})`))
    .returning()
  if (!closed) {
    const again = await findSequence(key.labId, externalId)
    if (again?.status === 'open') throw problem(409, 'sequence-empty', `Sequence ${externalId} holds no acquisitions; there is nothing to process.`)
    return answer(200, await sequenceViewOf(again!))
  }
  await processSequence(closed)
  return answer(200, await sequenceViewOf((await findSequence(key.labId, externalId))!))
}
