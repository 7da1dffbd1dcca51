import { idParams } from '#shared/schemas/common'
import { partnerClientInput } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const actor = await requirePartnerAccess(event, id, 'write')
  const input = await readValidBody(event, partnerClientInput)
  setResponseStatus(event, 201)
  // The client secret is in this answer only.
  return createPartnerClient(auditContext(event, actor), id, input)
})
