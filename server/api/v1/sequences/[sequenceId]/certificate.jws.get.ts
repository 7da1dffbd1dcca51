import { sequenceParams } from '#shared/schemas/sequences'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { sequenceId } = getValidParams(event, sequenceParams)
  const audit = { actor: { id: null, label: `lab key ${key.name}` }, ip: clientAddress(event) }
  return sendDownload(event, await certificateDownload(await sequenceCertificate(key.labId, audit, { sequenceId }), 'jws'))
})
