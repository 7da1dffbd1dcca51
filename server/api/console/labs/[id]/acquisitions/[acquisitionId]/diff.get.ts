import { labAcquisitionParams } from '#shared/schemas/instruments'
import { resultDiffQuery } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  return resultDiff(id, acquisitionId, getValidQuery(event, resultDiffQuery))
})
