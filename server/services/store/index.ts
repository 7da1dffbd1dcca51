// The object store for raw data (issue 23): S3-compatible storage addressed by SHA-256
// (raw/<sha256>: the body as received; arrays/<sha256>: the parsed body, arrays as float64),
// the references rows keep, the readers' way back to a parsed body, retention per lab and the
// move of payloads from before the store.
export { storeEnabled, closeStore } from './client'
export { headObject, getObjectStream, getObjectBytes, checkStore, objectKey, isStoreUnavailable, type ObjectKind } from './objects'
export { storePayload, loadPayload, payloadOf, rawDataRemoved, type ReceivedBody, type PayloadRef } from './payloads'
export { kickRetention, runRetention } from './jobs'
