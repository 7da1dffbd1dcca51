import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requirePartnerAccess(event, id, 'read')
  return { items: await listEndpoints(id) }
})
