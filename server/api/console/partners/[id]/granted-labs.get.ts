import { idParams } from '#shared/schemas/common'

// The labs that let this partner receive their results: what its endpoints may subscribe to.
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requirePartnerAccess(event, id, 'read')
  return { items: await labsGrantingPartner(id) }
})
