import { workingStandardInput } from '#shared/schemas/sequences'

// A new version of a working standard (a recalibration against reference materials).
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const body = await readValidBody(event, workingStandardInput)
  setResponseStatus(event, 201)
  return createWorkingStandardVersion(key.labId, body, { actor: { id: null, label: `lab key ${key.name}` }, ip: clientAddress(event) })
})
