import { sequenceRouteParams } from '#shared/schemas/isotopeViews'
import { getSequenceView } from '../../../../../services/isotopeViews'

export default defineEventHandler(async (event) => {
  const { id, sequenceId } = getValidParams(event, sequenceRouteParams)
  await requireLabAccess(event, id, 'read')
  return getSequenceView(id, sequenceId)
})
