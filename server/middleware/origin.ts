// Console routes change state only for requests from the console's own origin: a second
// guard beside the SameSite=Lax session cookie against cross-site requests.
export default defineEventHandler((event) => {
  if (!event.path.startsWith('/api/console/')) return
  if (['GET', 'HEAD', 'OPTIONS'].includes(event.method)) return
  const origin = getRequestHeader(event, 'origin')
  if (!origin) return
  const host = getRequestHeader(event, 'host')
  let originHost: string | undefined
  try { originHost = new URL(origin).host }
  catch { originHost = undefined }
  if (originHost !== host) throw problem(403, 'cross-origin', 'Console changes must come from the console itself.')
})
