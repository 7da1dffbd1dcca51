import document from '~~/openapi/openapi.json'

// The committed document (npm run openapi writes it; a test fails when it is stale).
export default defineEventHandler(() => document)
