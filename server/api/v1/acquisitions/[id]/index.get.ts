import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { id } = getValidParams(event, idParams)
  return getLabAcquisition(key.labId, id)
})
