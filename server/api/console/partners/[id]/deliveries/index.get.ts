import { idParams } from '#shared/schemas/common'
import { deliveryListQuery } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requirePartnerAccess(event, id, 'read')
  return listDeliveries(id, getValidQuery(event, deliveryListQuery))
})
