import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { id } = getValidParams(event, idParams)
  const spectrum = await spectrumOf(key.labId, id)
  setResponseHeader(event, 'content-type', 'chemical/x-jcamp-dx; charset=utf-8')
  setResponseHeader(event, 'content-disposition', attachmentName(spectrum.runId, 'jdx'))
  return spectrumJcamp(spectrum)
})
