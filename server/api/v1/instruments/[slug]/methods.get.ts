import { instrumentParams } from '#shared/schemas/sequences'

export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  const { slug } = getValidParams(event, instrumentParams)
  return { items: await listMethodVersions(key.labId, slug) }
})
