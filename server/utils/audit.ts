import type { H3Event } from 'h3'
import { auditLog } from '../database/schema'

export interface AuditActor { id: string | null, label: string }

/**
 * Who acts and from where, as the audit log records it. Built once per request by
 * `auditContext` and handed to services in place of the HTTP event, so that services take
 * plain arguments; background work names itself as the actor and has no address.
 */
export interface AuditContext { actor: AuditActor, ip: string | null }

/** The audit context of a request: the signed-in user (or nobody yet) and the client's address. */
export function auditContext(event: H3Event, user?: { id: string, email: string }): AuditContext {
  return { actor: user ? actorOf(user) : { id: null, label: 'anonymous' }, ip: clientAddress(event) }
}

/** Writes one audit entry, in the caller's transaction when it has one. */
export async function recordAudit(db: Queryable, entry: {
  actor: AuditActor
  ip?: string | null
  action: string
  targetType?: string
  targetId?: string
  detail?: Record<string, unknown>
}) {
  await db.insert(auditLog).values({
    actorUserId: entry.actor.id,
    actorLabel: entry.actor.label,
    action: entry.action,
    targetType: entry.targetType,
    targetId: entry.targetId,
    detail: entry.detail ?? {},
    ip: entry.ip ?? null,
  })
}

export function actorOf(user: { id: string, email: string }): AuditActor {
  return { id: user.id, label: user.email }
}
