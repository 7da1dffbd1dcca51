import { asc, eq } from 'drizzle-orm'
import { labs, partners } from '../../database/schema'
import type { LabInput, PartnerInput } from '#shared/schemas/orgs'
import { isLabScoped, type SessionUser } from '#shared/types/roles'

// Labs and partners: the two kinds of organisation in the hub. A lab manager sees and
// edits only their own lab and an integrator only their own partner; "not yours" is 404.

type Org = 'lab' | 'partner'
const tables = { lab: labs, partner: partners } as const
type OrgRow = typeof labs.$inferSelect | typeof partners.$inferSelect

function ownScope(user: SessionUser, org: Org): string | null | undefined {
  if (org === 'lab' && isLabScoped(user.role)) return user.labId
  if (org === 'partner' && user.role === 'integrator') return user.partnerId
  return undefined // admins and viewers see all
}

export async function listOrgs(user: SessionUser, org: Org) {
  const table = tables[org]
  const own = ownScope(user, org)
  const query = useDb().select().from(table).orderBy(asc(table.name), asc(table.id)).$dynamic()
  return own === undefined ? query : query.where(eq(table.id, own ?? '00000000-0000-0000-0000-000000000000'))
}

export async function getOrg(user: SessionUser, org: Org, id: string) {
  const own = ownScope(user, org)
  const table = tables[org]
  const [row] = own === undefined || own === id ? await useDb().select().from(table).where(eq(table.id, id)) : []
  if (!row) throw problem(404, `${org}-not-found`, `No such ${org}.`)
  return row
}

async function assertSlugFree(org: Org, slug: string, exceptId?: string) {
  const table = tables[org]
  const [row] = await useDb().select({ id: table.id }).from(table).where(eq(table.slug, slug))
  if (row && row.id !== exceptId) throw fieldProblem('slug', `another ${org} uses this slug`, 409, 'slug-taken')
}

export async function createOrg(audit: AuditContext, org: Org, input: LabInput | PartnerInput) {
  await assertSlugFree(org, input.slug)
  return useDb().transaction(async (tx) => {
    const row = firstRow(org === 'lab'
      ? await tx.insert(labs).values(input as LabInput).returning()
      : await tx.insert(partners).values(input as PartnerInput).returning())
    await recordAudit(tx, { ...audit, action: `${org}.created`, targetType: org, targetId: row.id, detail: { slug: row.slug, name: row.name } })
    return row
  })
}

export async function updateOrg(audit: AuditContext, actor: SessionUser, org: Org, id: string, change: Partial<LabInput & PartnerInput>) {
  const before = await getOrg(actor, org, id)
  // A slug names the organisation in URLs, keys and partners' systems, and a partner's kind
  // decides what it is shown: only a hub admin changes them (issue 21). Sent unchanged is fine.
  if (actor.role !== 'admin') {
    for (const field of ['slug', 'kind'] as const) {
      if (change[field] !== undefined && change[field] !== (before as Record<string, unknown>)[field]) {
        throw fieldProblem(field, 'only a hub admin may change this', 403, 'admin-only-field')
      }
    }
  }
  if (change.slug) await assertSlugFree(org, change.slug, id)
  return useDb().transaction(async (tx) => {
    const table = tables[org]
    // Named, because Drizzle's answer for an update of one of two tables is too wide for the
    // console's inferred route types to follow (they read it as unknown).
    const row: OrgRow = firstRow(await tx.update(table).set({ ...change, updatedAt: new Date() }).where(eq(table.id, id)).returning())
    const changed = Object.keys(change).filter(k => (before as Record<string, unknown>)[k] !== (row as Record<string, unknown>)[k])
    await recordAudit(tx, { ...audit, action: `${org}.updated`, targetType: org, targetId: id, detail: { changed } })
    return row
  })
}
