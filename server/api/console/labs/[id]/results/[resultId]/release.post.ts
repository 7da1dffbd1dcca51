import { labResultParams, releaseInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, resultId } = getValidParams(event, labResultParams)
  const user = await requireLabAccess(event, id, 'review')
  const { comment } = await readValidBody(event, releaseInput)
  return releaseResult(useDb(), auditContext(event, user), resultId, { labId: id, comment })
})
