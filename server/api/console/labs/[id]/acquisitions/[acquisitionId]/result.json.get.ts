import { labAcquisitionParams } from '#shared/schemas/instruments'

// The result as the API answers it, as a file.
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const view = await getAcquisition(id, acquisitionId)
  setResponseHeaders(event, { 'content-type': 'application/json', 'content-disposition': attachmentName(`${view.runId}-result`, 'json') })
  return JSON.stringify(view, null, 2)
})
