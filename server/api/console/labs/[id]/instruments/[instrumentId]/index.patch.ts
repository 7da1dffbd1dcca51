import { instrumentUpdate, labInstrumentParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, labInstrumentParams)
  const actor = await requireLabAccess(event, id, 'write')
  const { name } = await readValidBody(event, instrumentUpdate)
  return renameInstrument(auditContext(event, actor), id, instrumentId, name)
})
