import { and, desc, eq, gt, isNull } from 'drizzle-orm'
import { invitations, labs, partners, users } from '../../database/schema'
import type { InvitationInput } from '#shared/schemas/users'
import { roleLabels, type SessionUser } from '#shared/types/roles'
import { kickMailOutbox, linkMail, queueMail } from '../mail'
import { assertScopeExists } from './accounts'

const invitationDays = 7

export type InvitationState = 'pending' | 'accepted' | 'revoked' | 'expired'
function stateOf(row: { acceptedAt: Date | null, revokedAt: Date | null, expiresAt: Date }): InvitationState {
  if (row.acceptedAt) return 'accepted'
  if (row.revokedAt) return 'revoked'
  return row.expiresAt <= new Date() ? 'expired' : 'pending'
}

/** Invites a person by e-mail; an earlier pending invitation to the same address is revoked. */
export async function createInvitation(audit: AuditContext, inviter: SessionUser, input: InvitationInput) {
  const { appUrl } = useRuntimeConfig()
  const result = await useDb().transaction(async (tx) => {
    if (await tx.query.users.findFirst({ where: eq(users.email, input.email), columns: { id: true } })) {
      throw fieldProblem('email', 'a user with this e-mail exists already', 409, 'email-taken')
    }
    await assertScopeExists(tx, input)
    await tx.update(invitations).set({ revokedAt: new Date() })
      .where(and(eq(invitations.email, input.email), isNull(invitations.acceptedAt), isNull(invitations.revokedAt)))
    const { token, hash } = newLinkToken()
    const row = firstRow(await tx.insert(invitations).values({
      email: input.email, name: input.name ?? null, role: input.role, labId: input.labId, partnerId: input.partnerId,
      tokenHash: hash, invitedBy: inviter.id, expiresAt: new Date(Date.now() + invitationDays * 86_400_000),
    }).returning())
    const scope = await scopeName(tx, input)
    await queueMail(tx, linkMail(input.email, 'You are invited to Arcwise', [
      `${inviter.name} invited you to Arcwise as ${roleLabels[input.role].toLowerCase()}${scope ? ` of ${scope}` : ''}.`,
      `The link works once and for ${invitationDays} days.`,
    ], { label: 'Accept the invitation', url: `${appUrl}/invitations/${token}` }))
    await recordAudit(tx, { ...audit, action: 'invitation.created', targetType: 'invitation', targetId: row.id,
      detail: { email: input.email, role: input.role, labId: input.labId, partnerId: input.partnerId } })
    return row
  })
  kickMailOutbox()
  return present(result)
}

async function scopeName(db: Queryable, scope: { labId: string | null, partnerId: string | null }) {
  if (scope.labId) return (await db.query.labs.findFirst({ where: eq(labs.id, scope.labId) }))?.name
  if (scope.partnerId) return (await db.query.partners.findFirst({ where: eq(partners.id, scope.partnerId) }))?.name
  return undefined
}

function present(row: typeof invitations.$inferSelect) {
  const { tokenHash: _hidden, ...rest } = row
  return { ...rest, state: stateOf(row) }
}

export async function listInvitations() {
  const rows = await useDb().select().from(invitations).orderBy(desc(invitations.createdAt), desc(invitations.id)).limit(200)
  return rows.map(present)
}

export async function revokeInvitation(audit: AuditContext, id: string) {
  const [row] = await useDb().update(invitations).set({ revokedAt: new Date() })
    .where(and(eq(invitations.id, id), isNull(invitations.acceptedAt), isNull(invitations.revokedAt))).returning()
  if (!row) throw problem(404, 'invitation-not-found', 'No pending invitation with this id.')
  await recordAudit(useDb(), { ...audit, action: 'invitation.revoked', targetType: 'invitation', targetId: id, detail: { email: row.email } })
  return present(row)
}

/** The invitation behind a link, or a problem that says why the link no longer works. */
async function usableInvitation(db: Queryable, token: string, lock = false) {
  const query = db.select().from(invitations).where(eq(invitations.tokenHash, hashToken(token)))
  const [row] = lock ? await query.for('update') : await query
  if (!row) throw problem(404, 'invitation-invalid', 'This invitation link is not valid. Ask an admin for a new one.')
  const state = stateOf(row)
  if (state === 'accepted') throw problem(410, 'invitation-used', 'This invitation has been accepted already. Sign in instead.')
  if (state === 'revoked') throw problem(410, 'invitation-revoked', 'This invitation was withdrawn. Ask an admin for a new one.')
  if (state === 'expired') throw problem(410, 'invitation-expired', 'This invitation has expired. Ask an admin for a new one.')
  return row
}

export async function describeInvitation(token: string) {
  const db = useDb()
  const row = await usableInvitation(db, token)
  return { email: row.email, name: row.name, role: row.role, scope: await scopeName(db, row) ?? null, expiresAt: row.expiresAt }
}

/** Accepts an invitation: creates the user with the invited role; the caller signs them in (startConsoleSession). */
export async function acceptInvitation(audit: AuditContext, token: string, input: { name: string, password: string }) {
  const passwordHash = await hashPassword(input.password)
  const user = await useDb().transaction(async (tx) => {
    const inv = await usableInvitation(tx, token, true)
    if (await tx.query.users.findFirst({ where: eq(users.email, inv.email), columns: { id: true } })) {
      throw problem(409, 'email-taken', 'An account with this e-mail exists already. Sign in instead.')
    }
    const created = firstRow(await tx.insert(users).values({
      email: inv.email, name: input.name, passwordHash, role: inv.role, labId: inv.labId, partnerId: inv.partnerId,
    }).returning())
    await tx.update(invitations).set({ acceptedAt: new Date() }).where(and(eq(invitations.id, inv.id), gt(invitations.expiresAt, new Date())))
    await recordAudit(tx, { ...audit, actor: actorOf(created), action: 'invitation.accepted', targetType: 'user', targetId: created.id, detail: { invitationId: inv.id, role: inv.role } })
    return created
  })
  return { user: { id: user.id, email: user.email, name: user.name, role: user.role, labId: user.labId, partnerId: user.partnerId }, sessionVersion: user.sessionVersion }
}
