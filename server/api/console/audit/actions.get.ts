export default defineEventHandler(async (event) => {
  await requirePermission(event, 'audit:read')
  return { items: await auditActions() }
})
