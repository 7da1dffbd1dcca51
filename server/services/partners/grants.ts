import { and, eq, sql } from 'drizzle-orm'
import { resultEventTypes } from '#shared/schemas/partners'
import { grants, labs, partners } from '../../database/schema'

export function listGrants(labId: string) {
  return useDb().select({ id: grants.id, labId: grants.labId, partnerId: grants.partnerId, partnerName: partners.name, eventTypes: grants.eventTypes, createdAt: grants.createdAt })
    .from(grants).innerJoin(partners, eq(partners.id, grants.partnerId)).where(eq(grants.labId, labId)).orderBy(partners.name)
}

/** Lets a partner receive the lab's results; granting again updates the event types. */
export async function grantPartner(audit: AuditContext, labId: string, input: { partnerId: string, eventTypes: string[] }) {
  if (!await useDb().query.partners.findFirst({ where: eq(partners.id, input.partnerId), columns: { id: true } })) {
    throw fieldProblem('partnerId', 'no such partner')
  }
  // Granting what is granted already would change nothing and say so nowhere (issue 21).
  const existing = await useDb().query.grants.findFirst({ where: and(eq(grants.labId, labId), eq(grants.partnerId, input.partnerId)), columns: { eventTypes: true } })
  if (existing && [...existing.eventTypes].sort().join() === [...input.eventTypes].sort().join()) {
    throw fieldProblem('partnerId', 'already receives this lab\'s results with these events; change the events or revoke the grant', 409, 'grant-exists')
  }
  return useDb().transaction(async (tx) => {
    const row = firstRow(await tx.insert(grants).values({ labId, partnerId: input.partnerId, eventTypes: input.eventTypes, createdBy: audit.actor.id })
      .onConflictDoUpdate({ target: [grants.labId, grants.partnerId], set: { eventTypes: input.eventTypes } }).returning())
    await recordAudit(tx, { ...audit, action: 'grant.set', targetType: 'grant', targetId: row.id, detail: { labId, partnerId: input.partnerId, eventTypes: input.eventTypes } })
    return row
  })
}

export async function revokeGrant(audit: AuditContext, labId: string, grantId: string) {
  const [row] = await useDb().delete(grants).where(and(eq(grants.id, grantId), eq(grants.labId, labId))).returning()
  if (!row) throw problem(404, 'grant-not-found', 'No such grant for this lab.')
  await recordAudit(useDb(), { ...audit, action: 'grant.revoked', targetType: 'grant', targetId: grantId, detail: { labId, partnerId: row.partnerId } })
  return row
}

/** Labs that grant a partner any of `eventTypes` (by default the result events: the labs whose released results it may read). */
export async function grantedLabIds(partnerId: string, eventTypes: readonly string[] = resultEventTypes): Promise<string[]> {
  const rows = await useDb().select({ labId: grants.labId }).from(grants)
    .where(and(eq(grants.partnerId, partnerId), sql`${grants.eventTypes} && array[${sql.join(eventTypes.map(t => sql`${t}`), sql`, `)}]::text[]`))
  return rows.map(r => r.labId)
}

/** Labs that grant a partner anything, by name. */
export function labsGrantingPartner(partnerId: string) {
  return useDb().select({ id: labs.id, slug: labs.slug, name: labs.name, eventTypes: grants.eventTypes })
    .from(grants).innerJoin(labs, eq(labs.id, grants.labId)).where(eq(grants.partnerId, partnerId)).orderBy(labs.name)
}

/** Every partner, by name and kind only. */
export function grantablePartners() {
  return useDb().select({ id: partners.id, name: partners.name, kind: partners.kind }).from(partners).orderBy(partners.name)
}
