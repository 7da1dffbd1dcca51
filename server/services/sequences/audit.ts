import { auditLog } from '../../database/schema'

/** Who changed something and from where: services take this, not the HTTP event. */
export interface AuditContext { actor: { id: string | null, label: string }, ip: string | null }

/** One audit entry, in the caller's transaction when it has one. */
export async function auditIsotopes(db: Queryable, ctx: AuditContext, action: string, target: { type: string, id: string }, detail: Record<string, unknown>) {
  await db.insert(auditLog).values({ actorUserId: ctx.actor.id, actorLabel: ctx.actor.label, action, targetType: target.type, targetId: target.id, detail, ip: ctx.ip })
}
