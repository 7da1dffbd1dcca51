// The demo's review (issue 20): the stable-isotope lab's reviewer works through part of the
// queue the demo history left, as a person would in the console: most results released, one
// rejected with a comment, one released result retracted with a reason, the rest still held;
// and all but the two latest held CO2 sequences released, so the partner has normalised δ.
import { demoSignIn } from './console-client'

interface Held { resultId: string, runId: string }

export async function reviewDemo(base: string) {
  const reviewer = await demoSignIn(base, 'lab_reviewer')
  const [lab] = (await reviewer.call<{ items: { id: string }[] }>('GET', '/api/console/labs')).body.items
  if (!lab) return { released: 0, rejected: 0, retracted: 0, sequences: 0, held: 0 }
  const queue = (await reviewer.call<{ results: { items: Held[] }, sequences: { id: string }[] }>('GET', `/api/console/labs/${lab.id}/review?limit=200`)).body
  const held = queue.results.items
  const toRelease = held.slice(0, Math.max(0, held.length - 3))
  if (toRelease.length) await reviewer.call('POST', `/api/console/labs/${lab.id}/results/release`, { resultIds: toRelease.map(r => r.resultId), comment: 'Reviewed against the bench log; peaks and QC as expected.' })
  const toReject = held.at(-1)
  if (toReject) await reviewer.call('POST', `/api/console/labs/${lab.id}/results/${toReject.resultId}/reject`, { comment: 'Source pressure logged out of range during this run; re-run the sample.' })
  const toRetract = toRelease[0]
  if (toRetract) await reviewer.call('POST', `/api/console/labs/${lab.id}/results/${toRetract.resultId}/retract`, { reason: 'Sample label mix-up found at the weekly audit: this run belongs to another client\'s vial.' })
  const sequences = queue.sequences.slice(0, Math.max(0, queue.sequences.length - 2))
  // A sequence whose members' results are not all released is refused (409): counted only when released.
  let releasedSequences = 0
  for (const s of sequences) {
    if ((await reviewer.call('POST', `/api/console/labs/${lab.id}/sequences/${s.id}/release`, {})).status === 200) releasedSequences++
  }
  return { released: toRelease.length, rejected: toReject ? 1 : 0, retracted: toRetract ? 1 : 0, sequences: releasedSequences, held: held.length - toRelease.length - (toReject ? 1 : 0) }
}
