import { idParams } from '#shared/schemas/common'
import { reviewQueueQuery } from '#shared/schemas/review'

// The lab's review queue: held results (oldest first, in cursor pages) and held sequences.
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requireLabAccess(event, id, 'read')
  const query = getValidQuery(event, reviewQueueQuery)
  const [results, sequences] = await Promise.all([heldResults(id, query.limit, query.cursor), heldSequences(id, 100)])
  return { results, sequences }
})
