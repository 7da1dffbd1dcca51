import { sequenceListQuery } from '#shared/schemas/sequences'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  return listSequences(key.labId, getValidQuery(event, sequenceListQuery))
})
