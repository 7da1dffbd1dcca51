import { deliveryParams } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, deliveryId } = getValidParams(event, deliveryParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  return replayDelivery(auditContext(event, actor), id, deliveryId)
})
