// A `worker` process (NUXT_PROCESS_ROLE=worker, `npm run worker`) does background work only:
// it answers its health checks and metrics (a worker's delivery figures are its own) and
// nothing else.
const operatorPaths = new Set(['/api/health', '/livez', '/readyz', '/metrics'])

export default defineEventHandler((event) => {
  if (useRuntimeConfig().processRole !== 'worker') return
  if (operatorPaths.has(event.path.split('?')[0]!)) return
  throw problem(404, 'not-found', 'This process is a worker; it serves no requests.')
})
