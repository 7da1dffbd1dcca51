import { sequenceParams } from '#shared/schemas/sequences'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { sequenceId } = getValidParams(event, sequenceParams)
  return getSequence(key.labId, sequenceId)
})
