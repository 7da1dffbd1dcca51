import { acquisitionListQuery } from '#shared/schemas/acquisitions'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  return listAcquisitions(key.labId, getValidQuery(event, acquisitionListQuery))
})
