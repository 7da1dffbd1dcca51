import { passwordResetRequest } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const { email } = await readValidBody(event, passwordResetRequest)
  await requestPasswordReset(auditContext(event), email)
  setResponseStatus(event, 202)
  // The same answer whether or not the e-mail has an account.
  return { detail: 'If an account uses this e-mail, a reset link is on its way.' }
})
