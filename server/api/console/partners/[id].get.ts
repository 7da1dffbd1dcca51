import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'partners:read')
  const { id } = getValidParams(event, idParams)
  return getOrg(user, 'partner', id)
})
