import { labParams } from '#shared/schemas/instruments'
import { consoleSequenceListQuery } from '#shared/schemas/isotopeViews'
import { listSequenceViews } from '../../../../../services/isotopeViews'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return listSequenceViews(id, getValidQuery(event, consoleSequenceListQuery))
})
