// Access: accounts and sign-in, console sessions, invitations, password resets, lab API
// keys, and the per-minute limits that hold across app processes.
export { signIn, listUsers, updateUser } from './accounts'
export { issueKey, listKeys, revokeKey, verifyLabKey, type LabKey } from './apiKeys'
export { createInvitation, listInvitations, revokeInvitation, describeInvitation, acceptInvitation } from './invitations'
export { requestPasswordReset, describePasswordReset, completePasswordReset } from './passwordResets'
export { consumeRateLimit, consumePartnerAction, consumePerMinute } from './rateLimits'
export { openSessionRow, userOfOpenSession, endConsoleSession, endUserSessions, consumeConsoleChange } from './sessions'
