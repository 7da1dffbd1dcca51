import { partnerClientParams } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const { id, clientId } = getValidParams(event, partnerClientParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  return revokePartnerClient(auditContext(event, actor), id, clientId)
})
