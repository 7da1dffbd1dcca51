import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const { id } = getValidParams(event, idParams)
  return uploadStatus(key.labId, id)
})
