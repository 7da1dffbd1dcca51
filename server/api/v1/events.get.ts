import { eventFeedQuery } from '#shared/schemas/partners'

export default defineEventHandler(async (event) => {
  const token = await requirePartnerToken(event, 'events:read')
  return eventFeed(token.partnerId, getValidQuery(event, eventFeedQuery))
})
