export default defineEventHandler(async () => ({ items: await listExchangeSchemas() }))
