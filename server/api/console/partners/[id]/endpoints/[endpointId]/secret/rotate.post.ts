import { endpointParams, secretRotation } from '#shared/schemas/webhooks'

export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  const { overlapHours } = await readValidBody(event, secretRotation)
  return rotateSecret(auditContext(event, actor), id, endpointId, overlapHours)
})
