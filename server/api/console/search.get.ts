import { searchQuery } from '#shared/schemas/search'

// The console's search box and palette: what the signed-in user may read that matches `q`.
export default defineEventHandler(async (event) => {
  const user = await requireUser(event)
  const { q } = getValidQuery(event, searchQuery)
  return { items: await searchConsole(user, q) }
})
