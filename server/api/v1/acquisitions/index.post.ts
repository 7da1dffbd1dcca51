import { acquisitionInput } from '#shared/schemas/acquisitions'

// A 2,000,000-point sweep with one detector column is about 40 MB of JSON.
const MAX_JSON_BYTES = 64 * 1024 * 1024

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  assertBodySize(event, MAX_JSON_BYTES)
  const schema = await checkExchangeSchema(event, 'acquisition', requestedSchemaVersion(event))
  const idempotencyKey = getIdempotencyKey(event)
  const body = await readValidBody(event, acquisitionInput)
  return withIdempotency(event, key.id, idempotencyKey, bodyHash(body), () => acceptAcquisition(key, body, schema.id))
})
