import { labResultParams, retractInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, resultId } = getValidParams(event, labResultParams)
  const user = await requireLabAccess(event, id, 'review')
  const { reason } = await readValidBody(event, retractInput)
  return retractResult(auditContext(event, user), id, resultId, reason)
})
