import { controlChartQuery, instrumentRouteParams } from '#shared/schemas/isotopeViews'
import { getControlChartView } from '../../../../../services/isotopeViews'

export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, instrumentRouteParams)
  await requireLabAccess(event, id, 'read')
  const { material, quantity } = getValidQuery(event, controlChartQuery)
  return getControlChartView(id, instrumentId, material, quantity)
})
