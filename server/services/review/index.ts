// Review and release (issue 20): a lab's reviewers release, reject and retract results and
// sequences (four eyes when the lab asks), the lab's release settings, and the review queue.
// Releases and retractions record the lab events partners receive.
export { releaseResult, releaseResults, rejectResult, retractResult, heldResults, RESULT_RELEASED, RESULT_CORRECTED, RESULT_RETRACTED, type ReleaseOptions } from './results'
export { releaseSequence, rejectSequence, retractSequence, heldSequences } from './sequences'
export { releaseSettings, updateReleaseSettings } from './settings'
