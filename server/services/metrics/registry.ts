import { sql } from 'drizzle-orm'
import { collectDefaultMetrics, Counter, Gauge, Histogram, Registry } from 'prom-client'

const registry = new Registry()
// Process CPU, resident memory, heap, event-loop lag and GC, as prom-client defines them.
collectDefaultMetrics({ register: registry, prefix: 'arcwise_' })

// Latency buckets in seconds: ingest answers in milliseconds to a few seconds (10^6-point bodies).
const latencyBuckets = [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30]

const requests = new Histogram({
  name: 'arcwise_http_request_duration_seconds',
  help: 'HTTP requests by route group and status class, answer time in seconds',
  labelNames: ['group', 'method', 'status'] as const,
  buckets: latencyBuckets,
  registers: [registry],
})

const acquisitions = new Counter({
  name: 'arcwise_acquisitions_total',
  help: 'Acquisition posts by outcome: accepted (201), replayed (200, the same body again), refused (4xx but 429), rate-limited (429), failed (5xx)',
  labelNames: ['outcome'] as const,
  registers: [registry],
})

const engine = new Histogram({
  name: 'arcwise_engine_duration_seconds',
  help: 'Engine time per acquisition (raw readings to peaks, ratios and flags), by acquisition mode',
  labelNames: ['mode'] as const,
  buckets: [0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5],
  registers: [registry],
})

const attempts = new Histogram({
  name: 'arcwise_delivery_attempt_duration_seconds',
  help: 'Webhook delivery attempts by outcome class (success, http-error, timeout, network-error, guard-refused …), send time in seconds',
  labelNames: ['class'] as const,
  buckets: latencyBuckets,
  registers: [registry],
})

const storeCalls = new Histogram({
  name: 'arcwise_store_call_duration_seconds',
  help: 'Object-store calls (raw data: put, get, head, delete, head-bucket) by outcome (ok, not-found, error), time in seconds; _count counts the calls',
  labelNames: ['op', 'outcome'] as const,
  buckets: latencyBuckets,
  registers: [registry],
})

// Gauges read from PostgreSQL at scrape time.
const queue = new Gauge({
  name: 'arcwise_delivery_queue',
  help: 'Pending webhook deliveries: all pending, due now (next attempt time passed), and leased (being sent)',
  labelNames: ['state'] as const,
  registers: [registry],
})
const queueAge = new Gauge({
  name: 'arcwise_delivery_queue_oldest_age_seconds',
  help: 'Age of the oldest pending delivery (since it was written), and of the oldest due one not being sent (since it fell due)',
  labelNames: ['state'] as const,
  registers: [registry],
})
const backlog = new Gauge({
  name: 'arcwise_backlog',
  help: 'Other work waiting: mail in the outbox, deferred uploads not yet processed',
  labelNames: ['queue'] as const,
  registers: [registry],
})
const connections = new Gauge({
  name: 'arcwise_database_connections',
  help: 'Connections to the hub\'s database by state (pg_stat_activity): every process\'s pool together',
  labelNames: ['state'] as const,
  registers: [registry],
})

type Groups = 'ingest' | 'partner-api' | 'console' | 'oauth' | 'well-known' | 'pages'

/** A bounded set of labels: the route group, never the path (ids would make a series each). */
function groupOf(method: string, path: string): Groups {
  if (path.startsWith('/api/v1/oauth/')) return 'oauth'
  if (method === 'POST' && (path === '/api/v1/acquisitions' || path.startsWith('/api/v1/uploads'))) return 'ingest'
  if (path.startsWith('/api/v1/')) return 'partner-api'
  if (path.startsWith('/api/console/')) return 'console'
  if (path.startsWith('/.well-known/')) return 'well-known'
  return 'pages'
}

function acquisitionOutcome(status: number) {
  if (status === 201) return 'accepted'
  if (status === 200) return 'replayed'
  if (status === 429) return 'rate-limited'
  return status >= 500 ? 'failed' : 'refused'
}

export function observeRequest(method: string, path: string, status: number, seconds: number) {
  const bare = path.split('?')[0]!
  requests.observe({ group: groupOf(method, bare), method, status: `${Math.floor(status / 100)}xx` }, seconds)
  if (method === 'POST' && bare === '/api/v1/acquisitions') acquisitions.inc({ outcome: acquisitionOutcome(status) })
}

export function observeEngine(mode: string, seconds: number) {
  engine.observe({ mode }, seconds)
}

export function observeDeliveryAttempt(cls: string, seconds: number) {
  attempts.observe({ class: cls }, seconds)
}

export function observeStoreCall(op: string, outcome: 'ok' | 'not-found' | 'error', seconds: number) {
  storeCalls.observe({ op, outcome }, seconds)
}

async function readGauges() {
  const db = useDb()
  const [q] = await db.execute<{ pending: number, due: number, leased: number, oldest_pending: number | null, oldest_due: number | null }>(sql`
    select count(*)::int as pending,
      count(*) filter (where next_attempt_at <= now())::int as due,
      count(*) filter (where lease_until > now())::int as leased,
      extract(epoch from now() - min(created_at))::float8 as oldest_pending,
      extract(epoch from now() - min(next_attempt_at) filter (where next_attempt_at <= now() and (lease_until is null or lease_until <= now())))::float8 as oldest_due
    from deliveries where status = 'pending'`)
  queue.set({ state: 'pending' }, q?.pending ?? 0)
  queue.set({ state: 'due' }, q?.due ?? 0)
  queue.set({ state: 'leased' }, q?.leased ?? 0)
  queueAge.set({ state: 'pending' }, q?.oldest_pending ?? 0)
  queueAge.set({ state: 'due' }, q?.oldest_due ?? 0)
  const [b] = await db.execute<{ mail: number, uploads: number }>(sql`
    select (select count(*) from mail_outbox where status = 'pending')::int as mail,
      (select count(*) from uploads where status in ('pending', 'processing'))::int as uploads`)
  backlog.set({ queue: 'mail' }, b?.mail ?? 0)
  backlog.set({ queue: 'uploads' }, b?.uploads ?? 0)
  connections.reset()
  const rows = await db.execute<{ state: string | null, n: number }>(sql`
    select coalesce(state, 'unknown') as state, count(*)::int as n from pg_stat_activity where datname = current_database() group by 1`)
  for (const r of rows) connections.set({ state: r.state ?? 'unknown' }, r.n)
}

/** The whole exposition, gauges refreshed from the database first. */
export async function metricsText(): Promise<{ body: string, contentType: string }> {
  await readGauges()
  return { body: await registry.metrics(), contentType: registry.contentType }
}
