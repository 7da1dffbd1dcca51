import { idParams } from '#shared/schemas/common'

export default defineEventHandler(async (event) => {
  const token = await requirePartnerToken(event, 'results:read')
  const { id } = getValidParams(event, idParams)
  return partnerResult(token.partnerId, id)
})
