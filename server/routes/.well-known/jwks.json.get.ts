// The public keys that verify Arcwise access tokens (RFC 7517 key set).
export default defineEventHandler(async (event) => {
  setResponseHeader(event, 'cache-control', 'public, max-age=300')
  return jwks()
})
