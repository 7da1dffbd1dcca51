import { labInput } from '#shared/schemas/orgs'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'labs:create')
  const input = await readValidBody(event, labInput)
  setResponseStatus(event, 201)
  return createOrg(auditContext(event, actor), 'lab', input)
})
