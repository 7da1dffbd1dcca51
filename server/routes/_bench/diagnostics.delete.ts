// Starts a new measuring window of the event-loop delay (chaos calls it before its fuzz
// phase). Exists only when NUXT_DIAGNOSTICS=true.
export default defineEventHandler((event) => {
  if (!useRuntimeConfig().diagnostics) throw problem(404, 'not-found', 'No such route.')
  resetDiagnostics()
  setResponseStatus(event, 204)
  return null
})
