import { schemaParams } from '#shared/schemas/exchange'

export default defineEventHandler(async (event) => {
  const { name, version } = getValidParams(event, schemaParams)
  const row = await getExchangeSchema(name, version)
  announceDeprecation(event, row)
  setResponseHeader(event, 'content-type', 'application/schema+json')
  return row.jsonSchema
})
