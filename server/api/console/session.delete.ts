// Sign-out: clears the cookie; clearing ends the session on the server too (the 'clear' hook
// in server/plugins/sessions.ts), so a copied cookie stops working.
export default defineEventHandler(async (event) => {
  const session = await getUserSession(event)
  const userId = (session.user as { id?: unknown } | undefined)?.id
  await clearUserSession(event)
  if (typeof userId === 'string') await recordAudit(useDb(), { ...auditContext(event), actor: { id: userId, label: userId }, action: 'sign-out', targetType: 'user', targetId: userId })
  setResponseStatus(event, 204)
  return null
})
