import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'users:write')
  const { id } = getValidParams(event, idParams)
  return revokeInvitation(auditContext(event, actor), id)
})
