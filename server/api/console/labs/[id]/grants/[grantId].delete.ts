import { grantParams } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const { id, grantId } = getValidParams(event, grantParams)
  const actor = await requireLabAccess(event, id, 'write')
  return revokeGrant(auditContext(event, actor), id, grantId)
})
