import { invitationAcceptance, tokenParams } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const { token } = getValidParams(event, tokenParams)
  const input = await readValidBody(event, invitationAcceptance)
  setResponseStatus(event, 201)
  return acceptInvitation(event, token, input)
})
