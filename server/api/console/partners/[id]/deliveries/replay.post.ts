import { idParams } from '#shared/schemas/common'
import { replayFilter } from '#shared/schemas/webhooks'

// Bulk replay of failing or dead deliveries matching a filter (endpoint, event type, time range).
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  const filter = await readValidBody(event, replayFilter)
  return replayMatching(auditContext(event, actor), id, filter)
})
