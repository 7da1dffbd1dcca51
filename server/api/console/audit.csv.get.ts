import { auditQuery } from '#shared/schemas/orgs'

// The audit log under the same filters as the console's list, as CSV with each entry's sentence (newest first).
export default defineEventHandler(async (event) => {
  await requirePermission(event, 'audit:read')
  const csv = await auditCsv(getValidQuery(event, auditQuery))
  return sendDownload(event, { contentType: 'text/csv; charset=utf-8', disposition: 'attachment; filename="audit-log.csv"', body: csv })
})
