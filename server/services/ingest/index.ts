// Ingest: acquisition bodies (JSON or files), acceptance through the engine, the grouped
// write of everything an accepted acquisition owes, and deferred uploads.
export { bodyHash, acceptAcquisition, computeResult, uploadFromConsole } from './accept'
export { INLINE_POINTS, acquisitionFromBody, type AcquisitionBodySource,  pointCount, deferAcquisition, uploadStatus, kickUploads } from './uploads'
export type { QueryMeta } from './fileFormats'
