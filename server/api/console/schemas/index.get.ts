export default defineEventHandler(async (event) => {
  await requireUser(event)
  await flushSchemaUses()
  const rows = await listExchangeSchemas()
  return { items: await Promise.all(rows.map(async r => ({ ...r, usedBy: await schemaUsers(r.id) }))) }
})
