import { and, desc, eq, gte, ilike, lt, lte } from 'drizzle-orm'
import type { z } from 'zod'
import { auditLog } from '../../database/schema'
import type { auditQuery } from '#shared/schemas/orgs'

/** Audit entries newest first, in cursor pages keyed by id (stable under concurrent writes). */
export async function listAudit(query: z.output<typeof auditQuery>) {
  const where = and(
    query.action ? eq(auditLog.action, query.action) : undefined,
    query.actor ? ilike(auditLog.actorLabel, `%${query.actor.replace(/[%_\\]/g, c => `\\${c}`)}%`) : undefined,
    query.from ? gte(auditLog.at, query.from) : undefined,
    query.to ? lte(auditLog.at, query.to) : undefined,
    query.cursor ? lt(auditLog.id, query.cursor) : undefined,
  )
  const rows = await useDb().select().from(auditLog).where(where).orderBy(desc(auditLog.id)).limit(query.limit + 1)
  const items = rows.slice(0, query.limit)
  return { items, nextCursor: rows.length > query.limit ? String(items.at(-1)!.id) : null }
}

export async function auditActions(): Promise<string[]> {
  const rows = await useDb().selectDistinct({ action: auditLog.action }).from(auditLog).orderBy(auditLog.action)
  return rows.map(r => r.action)
}
