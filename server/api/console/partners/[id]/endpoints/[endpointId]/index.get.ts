import { endpointParams } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  await requirePartnerAccess(event, id, 'read')
  return getEndpoint(id, endpointId)
})
