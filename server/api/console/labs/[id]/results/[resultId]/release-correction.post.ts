import { labResultParams, releaseCorrectionInput } from '#shared/schemas/reprocessing'

export default defineEventHandler(async (event) => {
  const { id, resultId } = getValidParams(event, labResultParams)
  const user = await requireLabAccess(event, id, 'review')
  const { comment } = await readValidBody(event, releaseCorrectionInput)
  return releaseCorrection(auditContext(event, user), id, resultId, comment)
})
