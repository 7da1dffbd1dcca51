import { labAcquisitionParams } from '#shared/schemas/instruments'

// The result's delivery trail: which partners and endpoints were owed which version and event,
// how each went, whether its recorded signature verifies, and why one stopped.
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  return deliveryTrail(id, acquisitionId)
})
