import { labParams } from '#shared/schemas/instruments'
import { workingStandardInput } from '#shared/schemas/sequences'
import { createWorkingStandardVersion } from '../../../../../services/sequences'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  const user = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, workingStandardInput)
  setResponseStatus(event, 201)
  return createWorkingStandardVersion(id, input, { actor: actorOf(user), ip: clientAddress(event) })
})
