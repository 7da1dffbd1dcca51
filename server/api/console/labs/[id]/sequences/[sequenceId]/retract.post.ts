import { labSequenceParams, retractInput } from '#shared/schemas/review'

export default defineEventHandler(async (event) => {
  const { id, sequenceId } = getValidParams(event, labSequenceParams)
  const user = await requireLabAccess(event, id, 'review')
  const { reason } = await readValidBody(event, retractInput)
  return retractSequence(auditContext(event, user), id, sequenceId, reason)
})
