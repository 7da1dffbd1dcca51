import { stringify } from 'csv-stringify/sync'
import { and, desc, eq, gte, ilike, inArray, lt, lte, or } from 'drizzle-orm'
import type { z } from 'zod'
import { acquisitions, apiKeys, auditLog, exchangeSchemas, grants, instruments, invitations, labs, methods, partnerClients, partners, users, webhookEndpoints, workingStandards } from '../../database/schema'
import { auditSentence } from '#shared/auditSentences'
import type { auditQuery } from '#shared/schemas/orgs'

type AuditRow = typeof auditLog.$inferSelect
const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i
const likeEscaped = (s: string) => `%${s.replace(/[%_\\]/g, c => `\\${c}`)}%`

function conditions(query: z.output<typeof auditQuery>) {
  return and(
    query.action ? eq(auditLog.action, query.action) : undefined,
    query.actor ? or(ilike(auditLog.actorLabel, likeEscaped(query.actor)), ilike(users.name, likeEscaped(query.actor))) : undefined,
    query.targetType ? eq(auditLog.targetType, query.targetType) : undefined,
    query.target ? eq(auditLog.targetId, query.target) : undefined,
    query.from ? gte(auditLog.at, query.from) : undefined,
    query.to ? lte(auditLog.at, query.to) : undefined,
    query.cursor ? lt(auditLog.id, query.cursor) : undefined,
  )
}

/** Audit entries newest first, each with its sentence, in cursor pages keyed by id (stable under concurrent writes). */
export async function listAudit(query: z.output<typeof auditQuery>) {
  const rows = await useDb().select({ entry: auditLog }).from(auditLog).leftJoin(users, eq(users.id, auditLog.actorUserId))
    .where(conditions(query)).orderBy(desc(auditLog.id)).limit(query.limit + 1)
  const items = await describeAudit(rows.slice(0, query.limit).map(r => r.entry))
  return { items, nextCursor: rows.length > query.limit ? String(items.at(-1)!.id) : null }
}

export async function auditActions(): Promise<string[]> {
  const rows = await useDb().selectDistinct({ action: auditLog.action }).from(auditLog).orderBy(auditLog.action)
  return rows.map(r => r.action)
}

export async function auditTargetTypes(): Promise<string[]> {
  const rows = await useDb().selectDistinct({ t: auditLog.targetType }).from(auditLog).orderBy(auditLog.targetType)
  return rows.flatMap(r => r.t ? [r.t] : [])
}

const CSV_ROWS = 10_000

// A cell a spreadsheet would run as a formula (=, +, -, @, tab, CR) is written with a leading
// apostrophe: names and labels come from people (OWASP, "CSV Injection").
const cell = (v: string) => /^[=+\-@\t\r]/.test(v) ? `'${v}` : v

/** The filtered log as CSV, newest first, at most CSV_ROWS rows, each with its sentence. */
export async function auditCsv(query: z.output<typeof auditQuery>) {
  const rows: Awaited<ReturnType<typeof describeAudit>> = []
  let cursor: number | undefined
  do {
    const page = await listAudit({ ...query, limit: 200, cursor })
    rows.push(...page.items)
    cursor = page.nextCursor ? Number(page.nextCursor) : undefined
  } while (cursor && rows.length < CSV_ROWS)
  return stringify(rows.slice(0, CSV_ROWS).map(r => [
    new Date(r.at).toISOString(), r.actorName, r.actorLabel, r.action, r.sentence, r.targetType ?? '', r.targetId ?? '', r.targetName ?? '', r.ip ?? '', JSON.stringify(r.detail ?? {}),
  ].map(v => cell(String(v)))), { header: true, columns: ['at', 'actor', 'actor_login', 'action', 'sentence', 'target_type', 'target_id', 'target', 'ip', 'detail'] })
}

/**
 * Names for the ids a page of entries holds (actors, targets, the labs and partners in their
 * details), found with one query a kind, then each entry's sentence. A name that no longer
 * resolves (a deleted endpoint) falls back to what the entry itself recorded.
 */
export async function describeAudit(rows: AuditRow[]) {
  const ids = new Map<string, Set<string>>()
  const want = (kind: string, id: unknown) => {
    if (typeof id !== 'string' || !UUID.test(id)) return
    if (!ids.has(kind)) ids.set(kind, new Set())
    ids.get(kind)!.add(id)
  }
  for (const r of rows) {
    want('user', r.actorUserId)
    if (r.targetType) want(r.targetType, r.targetId)
    const d = r.detail ?? {}
    want('lab', d.labId)
    want('partner', d.partnerId)
    for (const side of [d.from, d.to]) {
      if (side && typeof side === 'object') {
        want('lab', (side as Record<string, unknown>).labId)
        want('partner', (side as Record<string, unknown>).partnerId)
      }
    }
  }
  const db = useDb()
  const names = new Map<string, string>()
  const of = (kind: string) => [...(ids.get(kind) ?? [])]
  const lookups: Promise<void>[] = []
  const look = <T extends { id: string }>(kind: string, query: (list: string[]) => Promise<T[]>, name: (row: T) => string) => {
    const list = of(kind)
    if (list.length) lookups.push(query(list).then(found => { for (const row of found) names.set(row.id, name(row)) }))
  }
  look('user', l => db.select({ id: users.id, name: users.name, email: users.email }).from(users).where(inArray(users.id, l)), r => r.name || r.email)
  look('lab', l => db.select({ id: labs.id, name: labs.name }).from(labs).where(inArray(labs.id, l)), r => r.name)
  look('partner', l => db.select({ id: partners.id, name: partners.name }).from(partners).where(inArray(partners.id, l)), r => r.name)
  look('instrument', l => db.select({ id: instruments.id, name: instruments.name }).from(instruments).where(inArray(instruments.id, l)), r => r.name)
  look('api-key', l => db.select({ id: apiKeys.id, name: apiKeys.name, prefix: apiKeys.prefix }).from(apiKeys).where(inArray(apiKeys.id, l)), r => `"${r.name}" (awk_${r.prefix})`)
  look('webhook-endpoint', l => db.select({ id: webhookEndpoints.id, url: webhookEndpoints.url }).from(webhookEndpoints).where(inArray(webhookEndpoints.id, l)), r => r.url)
  look('exchange-schema', l => db.select({ id: exchangeSchemas.id, name: exchangeSchemas.name, version: exchangeSchemas.version }).from(exchangeSchemas).where(inArray(exchangeSchemas.id, l)), r => `${r.name} v${r.version}`)
  look('invitation', l => db.select({ id: invitations.id, email: invitations.email }).from(invitations).where(inArray(invitations.id, l)), r => r.email)
  look('grant', l => db.select({ id: grants.id, lab: labs.name, partner: partners.name }).from(grants).innerJoin(labs, eq(labs.id, grants.labId)).innerJoin(partners, eq(partners.id, grants.partnerId)).where(inArray(grants.id, l)), r => `${r.partner} ← ${r.lab}`)
  look('partner-client', l => db.select({ id: partnerClients.id, name: partnerClients.name, clientId: partnerClients.clientId }).from(partnerClients).where(inArray(partnerClients.id, l)), r => `"${r.name}" (${r.clientId})`)
  look('acquisition', l => db.select({ id: acquisitions.id, runId: acquisitions.externalId }).from(acquisitions).where(inArray(acquisitions.id, l)), r => `run ${r.runId}`)
  look('method', l => db.select({ id: methods.id, name: methods.name, version: methods.version }).from(methods).where(inArray(methods.id, l)), r => `${r.name} v${r.version}`)
  look('working-standard', l => db.select({ id: workingStandards.id, code: workingStandards.code, version: workingStandards.version }).from(workingStandards).where(inArray(workingStandards.id, l)), r => `${r.code} v${r.version}`)
  await Promise.all(lookups)

  const named = Object.fromEntries(names)
  return rows.map((r) => {
    const actorName = (r.actorUserId && names.get(r.actorUserId)) || r.actorLabel
    const targetName = r.targetId ? names.get(r.targetId) ?? null : null
    const sentence = auditSentence(r, { actor: actorName, target: targetName, names: named })
    return { ...r, actorName, targetName, sentence }
  })
}
