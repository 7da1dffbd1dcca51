import { instrumentParams, methodInput } from '#shared/schemas/sequences'

// A new method version, from the lab system that runs the instrument.
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'acquisitions:write')
  const { slug } = getValidParams(event, instrumentParams)
  const body = await readValidBody(event, methodInput)
  setResponseStatus(event, 201)
  return createMethodVersion(key.labId, slug, body, { actor: { id: null, label: `lab key ${key.name}` }, ip: clientAddress(event) })
})
