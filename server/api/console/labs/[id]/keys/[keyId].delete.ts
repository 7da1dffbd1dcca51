import { labKeyParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, keyId } = getValidParams(event, labKeyParams)
  const actor = await requireLabAccess(event, id, 'write')
  return revokeKey(auditContext(event, actor), id, keyId)
})
