import { invitationInput } from '#shared/schemas/users'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'users:write')
  const input = await readValidBody(event, invitationInput)
  setResponseStatus(event, 201)
  return createInvitation(auditContext(event, actor), actor, input)
})
