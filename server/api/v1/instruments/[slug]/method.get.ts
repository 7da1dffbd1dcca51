import { instrumentParams } from '#shared/schemas/sequences'

// The method in force on the instrument now.
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { slug } = getValidParams(event, instrumentParams)
  return currentMethod(key.labId, slug)
})
