import { labAcquisitionParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  return resultVersions(id, acquisitionId)
})
