import { labAcquisitionParams } from '#shared/schemas/instruments'

// The result as the API answers it, as a file.
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const view = await getAcquisition(id, acquisitionId)
  return sendDownload(event, { contentType: 'application/json', disposition: attachmentName(`${view.runId}-result`, 'json'), body: JSON.stringify(view, null, 2) })
})
