import { idParams } from '#shared/schemas/common'

// The partners a lab can grant its results to, by name: what a lab manager chooses from
// (lab managers may not read partners otherwise).
export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, idParams)
  await requireLabAccess(event, id, 'read')
  return { items: await grantablePartners() }
})
