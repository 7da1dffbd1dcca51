// The demo's review (issue 20): the stable-isotope lab's reviewer works through the queue the
// demo history left, as a person would in the console: every result but the three newest
// released (in pages of 200, the bulk limit), the newest rejected with a comment, one released
// result retracted with a reason, two still held; then all but the two latest held CO2
// sequences released (a sequence is released only once its members' results are), so the
// partner has normalised δ. Then the lab system asks for a few certificates of analysis, as a
// client's order would.
import { demoSignIn } from './console-client'
import { log } from './paths'

interface Held { resultId: string, acquisitionId: string, runId: string }
interface Queue { results: { items: Held[], nextCursor: string | null }, sequences: { id: string, sequenceId: string }[] }

/** Certificates are issued on first request: the lab key asks for the PDF of each. */
async function certify(base: string, labKey: string, paths: string[]) {
  let issued = 0
  for (const path of paths) {
    const res = await fetch(`${base}${path}`, { headers: { authorization: `Bearer ${labKey}` } })
    const body = await res.arrayBuffer()
    if (res.ok) issued++
    // Said, not skipped: a demo without its certificates is a demo that misleads.
    else log(`demo certificate ${path} refused: ${res.status} ${Buffer.from(body).toString('utf8').slice(0, 200)}`)
  }
  return issued
}

export async function reviewDemo(base: string, labKey?: string) {
  const reviewer = await demoSignIn(base, 'lab_reviewer')
  const [lab] = (await reviewer.call<{ items: { id: string }[] }>('GET', '/api/console/labs')).body.items
  if (!lab) return { released: 0, rejected: 0, retracted: 0, sequences: 0, held: 0, certificates: 0 }
  const queuePath = `/api/console/labs/${lab.id}/review?limit=200`
  const first = (await reviewer.call<Queue>('GET', queuePath)).body
  const held: Held[] = [...first.results.items]
  for (let cursor = first.results.nextCursor; cursor;) {
    const page = (await reviewer.call<Queue>('GET', `${queuePath}&cursor=${encodeURIComponent(cursor)}`)).body
    held.push(...page.results.items)
    cursor = page.results.nextCursor
  }
  const toRelease = held.slice(0, Math.max(0, held.length - 3))
  for (let i = 0; i < toRelease.length; i += 200) {
    await reviewer.call('POST', `/api/console/labs/${lab.id}/results/release`, { resultIds: toRelease.slice(i, i + 200).map(r => r.resultId), comment: 'Reviewed against the bench log; peaks and QC as expected.' })
  }
  const toReject = held.at(-1)
  if (toReject) await reviewer.call('POST', `/api/console/labs/${lab.id}/results/${toReject.resultId}/reject`, { comment: 'Source pressure logged out of range during this run; re-run the sample.' })
  const toRetract = toRelease[0]
  if (toRetract) await reviewer.call('POST', `/api/console/labs/${lab.id}/results/${toRetract.resultId}/retract`, { reason: 'Sample label mix-up found at the weekly audit: this run belongs to another client\'s vial.' })
  const sequences = first.sequences.slice(0, Math.max(0, first.sequences.length - 2))
  // A sequence whose members' results are not all released is refused (409): counted only when released.
  const releasedSequences: string[] = []
  for (const s of sequences) {
    if ((await reviewer.call('POST', `/api/console/labs/${lab.id}/sequences/${s.id}/release`, {})).status === 200) releasedSequences.push(s.sequenceId)
  }
  const certificates = labKey
    ? await certify(base, labKey, [
        ...toRelease.slice(1, 4).map(r => `/api/v1/results/${r.acquisitionId}/certificate.pdf`),
        // The lab API names a sequence by the lab's own id for it, as the lab system posted it.
        ...releasedSequences.slice(-2).map(id => `/api/v1/sequences/${encodeURIComponent(id)}/certificate.pdf`),
      ])
    : 0
  return { released: toRelease.length, rejected: toReject ? 1 : 0, retracted: toRetract ? 1 : 0, sequences: releasedSequences.length, held: held.length - toRelease.length - (toReject ? 1 : 0), certificates }
}
