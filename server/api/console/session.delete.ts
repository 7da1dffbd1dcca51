export default defineEventHandler(async (event) => {
  const session = await getUserSession(event)
  const userId = (session.user as { id?: string } | undefined)?.id
  await clearUserSession(event)
  if (userId) await recordAudit(useDb(), { actor: { id: userId, label: userId }, action: 'sign-out', targetType: 'user', targetId: userId, event })
  setResponseStatus(event, 204)
  return null
})
