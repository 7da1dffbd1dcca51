export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'labs:read')
  return { items: await listOrgs(user, 'lab') }
})
