import { labAcquisitionParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const spectrum = await spectrumOf(id, acquisitionId)
  setResponseHeaders(event, { 'content-type': 'chemical/x-jcamp-dx; charset=utf-8', 'content-disposition': attachmentName(spectrum.runId, 'jdx') })
  return spectrumJcamp(spectrum)
})
