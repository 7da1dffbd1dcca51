import { idParams } from '#shared/schemas/common'
import { partnerUpdate } from '#shared/schemas/orgs'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'partners:update')
  const { id } = getValidParams(event, idParams)
  const change = await readValidBody(event, partnerUpdate)
  return updateOrg(auditContext(event, actor), actor, 'partner', id, change)
})
