// The event-loop delay monitor behind /_bench/diagnostics: off unless NUXT_DIAGNOSTICS=true
// (`npm run chaos` turns it on for its app processes).
export default defineNitroPlugin(() => {
  if (useRuntimeConfig().diagnostics) startDiagnostics()
})
