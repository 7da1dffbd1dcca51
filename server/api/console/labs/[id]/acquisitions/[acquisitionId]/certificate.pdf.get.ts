import { labAcquisitionParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  const user = await requireLabAccess(event, id, 'read')
  return sendDownload(event, await certificateDownload(await resultCertificate({ labId: id }, auditContext(event, user), acquisitionId), 'pdf'))
})
