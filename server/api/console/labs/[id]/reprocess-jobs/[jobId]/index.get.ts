import { labJobParams } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, jobId } = getValidParams(event, labJobParams)
  await requireLabPermission(event, id, 'labs:read')
  return getReprocessJob(id, jobId)
})
