import { apiKeyInput, labParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  const actor = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, apiKeyInput)
  setResponseStatus(event, 201)
  // The secret is in this answer only; it is never shown again.
  return issueKey(auditContext(event, actor), id, input)
})
