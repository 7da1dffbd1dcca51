import { labResultParams, rejectInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, resultId } = getValidParams(event, labResultParams)
  const user = await requireLabAccess(event, id, 'review')
  const { comment } = await readValidBody(event, rejectInput)
  return rejectResult(auditContext(event, user), id, resultId, comment)
})
