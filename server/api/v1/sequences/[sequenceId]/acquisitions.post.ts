import { sequenceMemberInput, sequenceParams } from '#shared/schemas/sequences'

// One acquisition at its position in an open sequence (any order).
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const { sequenceId } = getValidParams(event, sequenceParams)
  const idempotencyKey = getIdempotencyKey(event)
  const body = await readValidBody(event, sequenceMemberInput)
  return withIdempotency<unknown>(event, key.id, idempotencyKey, sequenceBodyHash({ sequenceId, body }), () => addToSequence(key, sequenceId, body, event.context.requestId))
})
