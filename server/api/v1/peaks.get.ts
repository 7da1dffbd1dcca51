import { peakQuery } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const token = await requirePartnerToken(event, 'peaks:read')
  return peaksInWindow(token.partnerId, getValidQuery(event, peakQuery))
})
