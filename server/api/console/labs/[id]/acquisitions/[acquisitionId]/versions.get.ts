import { labAcquisitionParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabPermission(event, id, 'labs:read')
  return resultVersions(id, acquisitionId)
})
