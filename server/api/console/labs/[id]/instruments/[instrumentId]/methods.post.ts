import { instrumentRouteParams } from '#shared/schemas/isotopeViews'
import { methodInput } from '#shared/schemas/sequences'
import { createMethodVersion } from '../../../../../../services/sequences'

export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, instrumentRouteParams)
  const user = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, methodInput)
  const instrument = await getInstrument(id, instrumentId)
  setResponseStatus(event, 201)
  return createMethodVersion(id, instrument.slug, input, { actor: actorOf(user), ip: clientAddress(event) })
})
