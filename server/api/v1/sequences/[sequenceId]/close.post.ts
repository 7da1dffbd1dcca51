import { sequenceParams } from '#shared/schemas/sequences'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const { sequenceId } = getValidParams(event, sequenceParams)
  const { status, body } = await closeSequence(key, sequenceId)
  setResponseStatus(event, status)
  return body
})
