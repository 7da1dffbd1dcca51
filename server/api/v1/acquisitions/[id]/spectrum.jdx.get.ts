import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { id } = getValidParams(event, idParams)
  return sendDownload(event, await spectrumExport(key.labId, id, 'jdx'))
})
