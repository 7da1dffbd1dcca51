import { idParams } from '#shared/schemas/common'
import { bulkReleaseInput } from '#shared/schemas/review'

// Bulk release from the review queue: all the named results or none.
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const user = await requireLabAccess(event, id, 'review')
  const input = await readValidBody(event, bulkReleaseInput)
  return releaseResults(auditContext(event, user), id, input.resultIds, input.comment)
})
