// Exchange schemas: the versions this build speaks, their status and sunset, and their use.
export { registerExchangeSchemas, listExchangeSchemas, getExchangeSchema, schemaUsers, setSchemaStatus, checkExchangeSchema, countSchemaUse, flushSchemaUses } from './exchangeSchemas'
