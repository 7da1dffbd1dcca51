// Liveness: the process answers. It checks nothing else, so an orchestrator restarts a
// process only when it is stuck, not when PostgreSQL is away (that is /readyz).
export default defineEventHandler((event) => {
  setResponseHeader(event, 'cache-control', 'no-store')
  return { status: 'live' }
})
