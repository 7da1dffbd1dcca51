import { labSequenceParams, rejectInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, sequenceId } = getValidParams(event, labSequenceParams)
  const user = await requireLabAccess(event, id, 'review')
  const { comment } = await readValidBody(event, rejectInput)
  return rejectSequence(auditContext(event, user), id, sequenceId, comment)
})
