// The kinds of things audit entries are about, for the log's "About" filter.
export default defineEventHandler(async (event) => {
  await requirePermission(event, 'audit:read')
  return { items: await auditTargetTypes() }
})
