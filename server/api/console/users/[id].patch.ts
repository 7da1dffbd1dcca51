import { idParams } from '#shared/schemas/common'
import { userUpdate } from '#shared/schemas/users'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'users:write')
  const { id } = getValidParams(event, idParams)
  const change = await readValidBody(event, userUpdate)
  const { passwordHash: _hidden, ...user } = await updateUser(auditContext(event, actor), id, change)
  return user
})
