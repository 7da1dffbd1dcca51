// The worst event-loop delay since the last reset and the peak RSS of this process, for
// `npm run chaos`. Exists only when NUXT_DIAGNOSTICS=true.
export default defineEventHandler(() => {
  if (!useRuntimeConfig().diagnostics) throw problem(404, 'not-found', 'No such route.')
  return diagnosticsReading()
})
