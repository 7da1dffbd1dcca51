import { labAcquisitionParams } from '#shared/schemas/instruments'

// The body exactly as the lab sent it (JSON, CSV, JCAMP-DX, mzML or the multipart form),
// streamed from the object store, with its SHA-256 as RFC 9530's Repr-Digest.
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const body = await acquisitionReceivedBody(id, acquisitionId)
  setResponseHeaders(event, {
    'content-type': body.contentType,
    'content-length': body.bytes,
    'content-disposition': attachmentName(`${body.runId}-received`, 'bin'),
    'repr-digest': `sha-256=:${Buffer.from(body.sha256, 'hex').toString('base64')}:`,
  })
  return sendStream(event, body.stream)
})
