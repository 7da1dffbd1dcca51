import { idParams } from '#shared/schemas/common'
import { endpointInput } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  const input = await readValidBody(event, endpointInput)
  setResponseStatus(event, 201)
  return createEndpoint(auditContext(event, actor), id, input)
})
