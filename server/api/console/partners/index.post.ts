import { partnerInput } from '#shared/schemas/orgs'

export default defineEventHandler(async (event) => {
  const actor = await requirePermission(event, 'partners:create')
  const input = await readValidBody(event, partnerInput)
  setResponseStatus(event, 201)
  return createOrg(auditContext(event, actor), 'partner', input)
})
