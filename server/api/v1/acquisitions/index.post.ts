// JSON, or a file: CSV, JCAMP-DX, mzML, as the raw body or one multipart part.
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const schema = await requireExchangeSchema(event, 'acquisition')
  const idempotencyKey = getIdempotencyKey(event)
  const body = await readAcquisitionBody(event)
  const received = receivedBody(event)
  return withIdempotency<unknown>(event, key.id, idempotencyKey, bodyHash(body), () =>
    pointCount(body) > INLINE_POINTS ? deferAcquisition(key, body, schema.id, received) : acceptAcquisition(key, body, { schemaId: schema.id, received, requestId: event.context.requestId }))
})
