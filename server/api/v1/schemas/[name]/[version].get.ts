import { schemaParams } from '#shared/schemas/exchange'

export default defineEventHandler(async (event) => {
  const { name, version } = getValidParams(event, schemaParams)
  const row = await getExchangeSchema(name, version)
  if (row.status === 'deprecated') {
    setResponseHeader(event, 'deprecation', `@${Math.floor((row.deprecatedAt ?? new Date()).getTime() / 1000)}`)
    if (row.sunsetAt) setResponseHeader(event, 'sunset', row.sunsetAt.toUTCString())
  }
  setResponseHeader(event, 'content-type', 'application/schema+json')
  return row.jsonSchema
})
