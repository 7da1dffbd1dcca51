import { labParams } from '#shared/schemas/instruments'
import { methodsByInstrument } from '../../../../services/sequences'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return { items: await methodsByInstrument(id) }
})
