import { labSequenceParams, releaseInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, sequenceId } = getValidParams(event, labSequenceParams)
  const user = await requireLabAccess(event, id, 'review')
  const { comment } = await readValidBody(event, releaseInput)
  return releaseSequence(auditContext(event, user), id, sequenceId, comment)
})
