import { idParams } from '#shared/schemas/common'

// An admin signs a user out everywhere: every open session of theirs ends at once.
export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'users:write')
  const { id } = getValidParams(event, idParams)
  return endUserSessions(auditContext(event, actor), id)
})
