import { deliveryParams } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, deliveryId } = getValidParams(event, deliveryParams)
  await requirePartnerAccess(event, id, 'read')
  return getDelivery(id, deliveryId)
})
