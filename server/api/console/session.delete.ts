// Sign-out: ends the session on the server (a copied cookie stops working too), then clears the cookie.
export default defineEventHandler(async (event) => {
  const session = await getUserSession(event)
  const userId = (session.user as { id?: unknown } | undefined)?.id
  await endConsoleSession(session)
  await clearUserSession(event)
  if (typeof userId === 'string') await recordAudit(useDb(), { actor: { id: userId, label: userId }, action: 'sign-out', targetType: 'user', targetId: userId, event })
  setResponseStatus(event, 204)
  return null
})
