import { deliveryAttemptParams } from '#shared/schemas/webhooks'

// Checks one recorded attempt's signature against the endpoint's secret now; no secret is sent.
export default defineEventHandler(async (event) => {
  const { id, deliveryId, attemptId } = getValidParams(event, deliveryAttemptParams)
  await requirePartnerAccess(event, id, 'read')
  return checkAttemptSignature(id, deliveryId, attemptId)
})
