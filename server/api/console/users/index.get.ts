export default defineEventHandler(async (event) => {
  await requirePermission(event, 'users:read')
  return { items: await listUsers() }
})
