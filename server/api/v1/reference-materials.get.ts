// The international reference materials Arcwise knows, with their assigned values and sources.
export default defineEventHandler(async (event) => {
  await requireLabKey(event, 'results:read')
  const rows = await listReferenceMaterials()
  return { items: rows.map(r => ({ id: r.id, name: r.name, values: r.values, source: r.source, fromMemory: r.fromMemory })) }
})
