import { labParams } from '#shared/schemas/instruments'
import { listWorkingStandards } from '../../../../../services/sequences'

export default defineEventHandler(async (event) => {
  const { id } = getValidParams(event, labParams)
  await requireLabAccess(event, id, 'read')
  return { items: await listWorkingStandards(id) }
})
