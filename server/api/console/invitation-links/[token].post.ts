import { invitationAcceptance, tokenParams } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const { token } = getValidParams(event, tokenParams)
  const input = await readValidBody(event, invitationAcceptance)
  const { user, sessionVersion } = await acceptInvitation(auditContext(event), token, input)
  await startConsoleSession(event, { id: user.id, sessionVersion })
  setResponseStatus(event, 201)
  return user
})
