// Delivery: partners' webhook endpoints, the fan-out of events into delivery rows, the
// worker (claim, sign and send through the SSRF guard, record), and the delivery log.
export { fanOut, recordLabEvent, listEndpoints, getEndpoint, createEndpoint, updateEndpoint, deleteEndpoint, revealSecret, rotateSecret, sendTestEvent } from './endpoints'
export { listDeliveries, deliveryLogCsv, getDelivery, replayDelivery, replayMatching } from './log'
export { signedHeaders } from './message'
export { sendOnce } from './send'
export { kickDeliveries, startDeliveryWorker, stopDeliveryWorker } from './worker'
export { deliveryTrail, checkAttemptSignature, partnerResultBoard } from './trail'
