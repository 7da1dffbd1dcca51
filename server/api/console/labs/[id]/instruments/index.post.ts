import { instrumentInput, labParams } from '#shared/schemas/instruments'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  const actor = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, instrumentInput)
  setResponseStatus(event, 201)
  return createInstrument(auditContext(event, actor), id, input)
})
