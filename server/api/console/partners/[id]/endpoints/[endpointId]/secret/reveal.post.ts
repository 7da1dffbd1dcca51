import { endpointParams } from '#shared/schemas/webhooks'

// POST, not GET: a reveal is an act the audit log records, and no cache or prefetch should make one.
export default defineEventHandler(async (event) => {
  const { id, endpointId } = getValidParams(event, endpointParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  return revealSecret(auditContext(event, actor), id, endpointId)
})
