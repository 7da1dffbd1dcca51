import { idParams } from '#shared/schemas/common'

// The certificate of the acquisition's published result (its newest released version).
export default defineEventHandler(async (event) => {
  const { reader, audit } = await requireCertificateReader(event)
  const { id } = getValidParams(event, idParams)
  return sendDownload(event, await certificateDownload(await resultCertificate(reader, audit, id), 'jws'))
})
