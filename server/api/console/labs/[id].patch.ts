import { idParams } from '#shared/schemas/common'
import { labUpdate } from '#shared/schemas/orgs'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'labs:update')
  const { id } = getValidParams(event, idParams)
  const change = await readValidBody(event, labUpdate)
  return updateOrg(auditContext(event, actor), actor, 'lab', id, change)
})
