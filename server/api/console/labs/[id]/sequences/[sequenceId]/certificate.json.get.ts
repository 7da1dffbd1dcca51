import { sequenceRouteParams } from '#shared/schemas/isotopeViews'

export default defineEventHandler(async (event) => {
  const { id, sequenceId } = getValidParams(event, sequenceRouteParams)
  const user = await requireLabAccess(event, id, 'read')
  return sendDownload(event, await certificateDownload(await sequenceCertificate(id, auditContext(event, user), { id: sequenceId }), 'json'))
})
