import { idParams } from '#shared/schemas/common'
import { grantInput } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const actor = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, grantInput)
  setResponseStatus(event, 201)
  return grantPartner(auditContext(event, actor), id, input)
})
