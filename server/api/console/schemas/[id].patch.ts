import { idParams } from '#shared/schemas/common'
import { schemaDeprecation } from '#shared/schemas/exchange'

export default defineEventHandler(async (event) => {
  const actor = await requireRole(event, 'admin')
  const { id } = getValidParams(event, idParams)
  const change = await readValidBody(event, schemaDeprecation)
  return setSchemaStatus(auditContext(event, actor), id, change)
})
