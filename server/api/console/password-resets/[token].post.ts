import { passwordResetCompletion, tokenParams } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const { token } = getValidParams(event, tokenParams)
  const { password } = await readValidBody(event, passwordResetCompletion)
  return completePasswordReset(auditContext(event), token, password)
})
