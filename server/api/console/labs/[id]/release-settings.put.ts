import { idParams } from '#shared/schemas/common'
import { releaseSettingsInput } from '#shared/schemas/review'

// The lab's release policy, the QC codes automatic release accepts, and the four-eyes rule (lab managers and admins).
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  const user = await requireLabAccess(event, id, 'write')
  const input = await readValidBody(event, releaseSettingsInput)
  return updateReleaseSettings(auditContext(event, user), id, input)
})
