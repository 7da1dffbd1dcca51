import { labParams } from '#shared/schemas/instruments'
import { reprocessJobInput } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  const user = await requireLabAccess(event, id, 'reprocess')
  const input = await readValidBody(event, reprocessJobInput)
  setResponseStatus(event, 201)
  return createReprocessJob(auditContext(event, user), id, input)
})
