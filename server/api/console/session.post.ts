import { signInInput } from '#shared/schemas/auth'

export default defineEventHandler(async (event) => {
  const input = await readValidBody(event, signInInput)
  return signIn(event, input)
})
