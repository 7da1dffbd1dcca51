// A `worker` process (NUXT_PROCESS_ROLE=worker, `npm run worker`) does background work only:
// it answers its health check and nothing else.
export default defineEventHandler((event) => {
  if (useRuntimeConfig().processRole !== 'worker') return
  if (event.path === '/api/health') return
  throw problem(404, 'not-found', 'This process is a worker; it serves no requests.')
})
