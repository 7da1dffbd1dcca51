// Reprocessing with lineage (issue 20): jobs over a selection of an instrument's acquisitions,
// the durable worker that writes new result versions (never overwriting, held for review),
// an acquisition's versions and the diff between two, and the release of a correction.
export { createReprocessJob, listReprocessJobs, getReprocessJob, cancelReprocessJob } from './jobs'
export { startReprocessWorker, stopReprocessWorker, kickReprocessing } from './worker'
export { resultVersions, resultDiff } from './versions'
export { releaseCorrection } from './release'
