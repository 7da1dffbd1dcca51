import { labJobParams } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, jobId } = getValidParams(event, labJobParams)
  const user = await requireLabAccess(event, id, 'reprocess')
  return cancelReprocessJob(auditContext(event, user), id, jobId)
})
