import { labJobParams } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, jobId } = getValidParams(event, labJobParams)
  await requireLabAccess(event, id, 'read')
  return getReprocessJob(id, jobId)
})
