import { sequenceInput } from '#shared/schemas/sequences'

// A whole sequence at once, or one opened with its declared length (then filled by position).
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const idempotencyKey = getIdempotencyKey(event)
  const body = await readValidBody(event, sequenceInput)
  return withIdempotency<unknown>(event, key.id, idempotencyKey, sequenceBodyHash(body), () => openSequence(key, body, event.context.requestId))
})
