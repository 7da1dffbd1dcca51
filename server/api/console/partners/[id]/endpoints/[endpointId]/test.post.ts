import { endpointParams } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  return sendTestEvent(auditContext(event, actor), id, endpointId)
})
