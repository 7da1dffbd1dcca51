import type { H3Event } from 'h3'
import { auditLog } from '../database/schema'

export interface AuditActor { id: string | null, label: string }

/** Writes one audit entry, in the caller's transaction when it has one. */
export async function recordAudit(db: Queryable, entry: {
  actor: AuditActor
  action: string
  targetType?: string
  targetId?: string
  detail?: Record<string, unknown>
  event?: H3Event
}) {
  await db.insert(auditLog).values({
    actorUserId: entry.actor.id,
    actorLabel: entry.actor.label,
    action: entry.action,
    targetType: entry.targetType,
    targetId: entry.targetId,
    detail: entry.detail ?? {},
    ip: entry.event ? clientAddress(entry.event) : null,
  })
}

export function actorOf(user: { id: string, email: string }): AuditActor {
  return { id: user.id, label: user.email }
}
