import { labParams } from '#shared/schemas/instruments'
import { listControlChartViews } from '../../../../../services/isotopeViews'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return listControlChartViews(id)
})
