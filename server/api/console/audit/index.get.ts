import { auditQuery } from '#shared/schemas/orgs'

export default defineEventHandler(async (event) => {
  await requirePermission(event, 'audit:read')
  return listAudit(getValidQuery(event, auditQuery))
})
