export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'partners:read')
  return { items: await listOrgs(user, 'partner') }
})
