import type { H3Event } from 'h3'

/** Opens a console session for `user` (a row in user_sessions) and sets the sealed cookie that names it. */
export async function startConsoleSession(event: H3Event, user: { id: string, sessionVersion: number }) {
  const sessionId = await openSessionRow(user.id, { ip: clientAddress(event), userAgent: (getRequestHeader(event, 'user-agent') ?? '').slice(0, 300) || null })
  await replaceUserSession(event, { user: { id: user.id, sessionVersion: user.sessionVersion }, secure: { sessionId }, loggedInAt: Date.now() })
}
