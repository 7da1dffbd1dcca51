import { endpointParams } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  await deleteEndpoint(auditContext(event, actor), id, endpointId)
  setResponseStatus(event, 204)
  return null
})
