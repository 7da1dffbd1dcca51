import { tokenParams } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const { token } = getValidParams(event, tokenParams)
  return describeInvitation(token)
})
