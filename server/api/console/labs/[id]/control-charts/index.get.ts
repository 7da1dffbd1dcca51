import { labParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return listControlChartViews(id)
})
