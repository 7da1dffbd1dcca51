import { labAcquisitionParams } from '#shared/schemas/instruments'
import { resultDiffQuery } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabPermission(event, id, 'labs:read')
  return resultDiff(id, acquisitionId, getValidQuery(event, resultDiffQuery))
})
