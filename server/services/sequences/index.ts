// Sequences of acquisitions with standards, processed as a whole under a versioned method;
// reference materials, working standards and control charts (issue 19). The public names of
// the capability; the rest of the folder is private to it.
export { openSequence, addToSequence, closeSequence, sequenceBodyHash, type SequenceKey } from './intake'
export { getSequence, getSequenceById, listSequences } from './views'
export { SEQUENCE_EVENT, processSequence, sequenceEventData } from './processing'
export { createMethodVersion, currentMethod, listMethodVersions, methodsByInstrument } from './methods'
export { createWorkingStandardVersion, listReferenceMaterials, listWorkingStandards, seedReferenceMaterials } from './materials'
export { controlChart, listControlCharts, recentViolations } from './charts'
