import { labAcquisitionParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const spectrum = await spectrumOf(id, acquisitionId)
  setResponseHeaders(event, { 'content-type': 'text/csv; charset=utf-8', 'content-disposition': attachmentName(spectrum.runId, 'csv') })
  return spectrumCsv(spectrum)
})
