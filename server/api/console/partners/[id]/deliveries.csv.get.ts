import { idParams } from '#shared/schemas/common'
import { deliveryFilter } from '#shared/schemas/webhooks'

// The delivery log under the same filters as the console's list, as CSV (newest first).
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requirePartnerAccess(event, id, 'read')
  const csv = await deliveryLogCsv(id, getValidQuery(event, deliveryFilter))
  setResponseHeader(event, 'content-type', 'text/csv; charset=utf-8')
  setResponseHeader(event, 'content-disposition', 'attachment; filename="deliveries.csv"')
  return csv
})
