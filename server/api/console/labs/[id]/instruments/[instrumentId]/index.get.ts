import { labInstrumentParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, labInstrumentParams)
  await requireLabAccess(event, id, 'read')
  return getInstrument(id, instrumentId)
})
