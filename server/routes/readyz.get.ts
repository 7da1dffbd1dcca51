import { sql } from 'drizzle-orm'

// Readiness: this process can serve, because PostgreSQL answers within a couple of seconds.
// A load balancer stops sending it requests while this is 503 (RFC 9457 problem naming the
// failed check), and sends them again once it is 200.
const TIMEOUT_MS = 2000

export default defineEventHandler(async (event) => {
  setResponseHeader(event, 'cache-control', 'no-store')
  const started = performance.now()
  let timer: NodeJS.Timeout | undefined
  try {
    await Promise.race([
      useDb().execute(sql`select 1`),
      new Promise((_, reject) => { timer = setTimeout(() => reject(new Error(`no answer within ${TIMEOUT_MS} ms`)), TIMEOUT_MS) }),
    ])
  }
  catch (error) {
    throw problem(503, 'not-ready', `database: ${error instanceof Error ? error.message.split('\n')[0] : 'unreachable'}`, { headers: { 'retry-after': '5' } })
  }
  finally { clearTimeout(timer) }
  return { status: 'ready', checks: { database: { ok: true, ms: Math.round(performance.now() - started) } } }
})
