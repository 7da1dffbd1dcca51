import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requireLabAccess(event, id, 'read')
  return releaseSettings(id)
})
