import { instrumentUpdate, labInstrumentParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, labInstrumentParams)
  const actor = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, instrumentUpdate)
  return updateInstrument(auditContext(event, actor), id, instrumentId, input)
})
