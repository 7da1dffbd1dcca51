import { endpointParams, endpointUpdate } from '#shared/schemas/webhooks'

// Edits, and pause or resume (`status`).
export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  const input = await readValidBody(event, endpointUpdate)
  return updateEndpoint(auditContext(event, actor), id, endpointId, input)
})
