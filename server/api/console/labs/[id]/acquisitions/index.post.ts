import { labParams } from '#shared/schemas/instruments'

// A file uploaded in the console (CSV, JCAMP-DX, mzML or JSON as the multipart part "file").
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  const actor = await requireLabAccess(event, id, 'write')
  const input = await readAcquisitionBody(event)
  const { status, body } = await uploadFromConsole(auditContext(event, actor), id, input, receivedBody(event), event.context.requestId)
  setResponseStatus(event, status)
  return body
})
