import { sql } from 'drizzle-orm'

// Readiness: this process can serve, because PostgreSQL and the object store (when it is on)
// answer within a couple of seconds. A load balancer stops sending it requests while this is
// 503 (RFC 9457 problem naming each failed check), and sends them again once it is 200.
const TIMEOUT_MS = 2000

async function check(run: () => Promise<unknown>): Promise<{ ok: true, ms: number } | { ok: false, error: string }> {
  const started = performance.now()
  let timer: NodeJS.Timeout | undefined
  try {
    await Promise.race([run(), new Promise((_, reject) => { timer = setTimeout(() => reject(new Error(`no answer within ${TIMEOUT_MS} ms`)), TIMEOUT_MS) })])
    return { ok: true, ms: Math.round(performance.now() - started) }
  }
  catch (error) {
    const e = error as Error
    return { ok: false, error: (e.name && e.name !== 'Error' ? `${e.name}: ` : '') + (e.message?.split('\n')[0] || 'unreachable') }
  }
  finally { clearTimeout(timer) }
}

export default defineEventHandler(async (event) => {
  setResponseHeader(event, 'cache-control', 'no-store')
  const [database, store] = await Promise.all([
    check(() => useDb().execute(sql`select 1`)),
    storeEnabled() ? check(checkStore) : undefined,
  ])
  const failed = [['database', database], ['store', store]].flatMap(([name, c]) => c && typeof c === 'object' && !c.ok ? [`${name as string}: ${c.error}`] : [])
  if (failed.length) throw problem(503, 'not-ready', failed.join('; '), { headers: { 'retry-after': '5' } })
  return { status: 'ready', checks: { database, ...(store ? { store } : {}) } }
})
