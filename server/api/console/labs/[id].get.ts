import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'labs:read')
  const { id } = getValidParams(event, idParams)
  return getOrg(user, 'lab', id)
})
