import { idParams } from '#shared/schemas/common'

// Did each result reach this partner, verified? Its latest result deliveries by lab and result.
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requirePartnerAccess(event, id, 'read')
  return partnerResultBoard(id)
})
