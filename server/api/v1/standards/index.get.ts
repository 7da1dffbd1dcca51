// The lab's working standards, every version.
export default defineEventHandler(async (event) => {
  const key = await requireLabKey(event, 'results:read')
  return { items: await listWorkingStandards(key.labId) }
})
