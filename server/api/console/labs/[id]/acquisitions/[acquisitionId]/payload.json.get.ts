import { labAcquisitionParams } from '#shared/schemas/instruments'

// The raw payload as the lab sent it (as stored: jsonb keeps values, not key order or spacing).
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const { runId, json } = await acquisitionPayload(id, acquisitionId)
  return sendDownload(event, { contentType: 'application/json', disposition: attachmentName(`${runId}-payload`, 'json'), body: json })
})
