import { signInInput } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const input = await readValidBody(event, signInInput)
  const { user, sessionVersion } = await signIn(auditContext(event), input)
  await startConsoleSession(event, { id: user.id, sessionVersion })
  return user
})
