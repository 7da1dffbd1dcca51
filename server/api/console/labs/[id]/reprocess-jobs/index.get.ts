import { labParams } from '#shared/schemas/instruments'
import { reprocessJobListQuery } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return listReprocessJobs(id, getValidQuery(event, reprocessJobListQuery))
})
