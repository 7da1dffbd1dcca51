// `npm run chaos`: a soak of 100,000 deliveries with faults injected, then a fuzz phase; ends
// with one table and a JSON report under reports/. Loopback only, bounded in time, stops by itself.
//
// Soak: lab systems post CHAOS_ACQUISITIONS (10,000) acquisitions at CHAOS_RATE (20) a second,
// open loop, to two web processes (A, B) while two worker-only processes (C, D) share the
// delivery queue, against one PostgreSQL and the object-store fake (s3rver). Each event owes a
// delivery to eleven endpoints of one partner: seven steady; flaky (every third message fails
// twice with 500); slow for a while (answers after the send timeout); gone for a while
// (connection refused); never (503 always, disabled by the worker after 72 s of failures).
// Faults, one each: worker C killed with SIGKILL and restarted, PostgreSQL restarted, the
// object store stopped for CHAOS_STORE_OUTAGE_SECONDS (15) and started again (uploads meanwhile
// must be answered 503 with Retry-After; the lab systems wait that long and send again), web B
// killed with SIGKILL and restarted.
// Then the ledger: events ingested, deliveries owed, delivered (distinct webhook-ids answered
// 2xx), duplicates (further 2xx copies of a webhook-id; no run may reach one endpoint under two
// webhook-ids), dead (must be exactly those to "never"), lost (owed, neither delivered nor
// dead: must be 0), and every accepted acquisition's raw data read back from the store (both
// objects, SHA-256 checked). Per phase (from one fault to the next): deliveries/s at the
// receivers, p50/p99 from the ingest answer to receipt, the posts answered 503.
// Fuzz: first a fixed list of requests built to exhaust a process (bodies past the cap sent
// chunked with no Content-Length, backtracking bait in every text field and CSV header cell,
// zlib bombs in mzML arrays, prototype keys, malformed credentials), then CHAOS_FUZZ (10,000)
// generated bad requests (scripts/lib/fuzz.ts) against ingest and console routes: 5xx count,
// non-problem-document count, rows written, unanswered requests: all must be 0; bodies past
// the cap get 413; the worst event-loop stall inside the app processes (their
// /_bench/diagnostics route, NUXT_DIAGNOSTICS=true) under 200 ms and their peak RSS under
// 1 GB. A and B are restarted before the fuzz, so their peak RSS is the fuzz's.
// `npm run chaos -- --fuzz-only` skips the soak (the fuzz phase alone, two app processes).
import { spawn, type ChildProcess } from 'node:child_process'
import { createServer, type Server } from 'node:http'
import { mkdirSync, openSync, readFileSync, writeFileSync } from 'node:fs'
import { createHash } from 'node:crypto'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { GetObjectCommand, S3Client } from '@aws-sdk/client-s3'
import fc from 'fast-check'
import pLimit from 'p-limit'
import postgres from 'postgres'
import { buildIfStale } from './lib/build'
import { demoAdmin } from './lib/console-client'
import { demoInstruments } from './lib/demo-instruments'
import { badRequests, exhaustionRequests, rowCounts, rowsWritten, sendBadRequest, sendExhaustion, type FuzzOutcome } from './lib/fuzz'
import { quantile } from './lib/open-loop'
import { log, root } from './lib/paths'
import { restartCluster } from './lib/pg'
import { seedDemo } from './lib/seed'
import { startStack, waitForServer } from './lib/services'

const ACQUISITIONS = Number(process.env.CHAOS_ACQUISITIONS ?? 10_000)
const RATE = Number(process.env.CHAOS_RATE ?? 20) // acquisitions per second, posted open loop
const SECONDS = ACQUISITIONS / RATE
// How long the object store stays down; "slow" and "gone" keep their outages as long (+5 s
// and +10 s), all well inside the 72 s after which the worker disables a failing endpoint.
const STORE_OUTAGE_SECONDS = Number(process.env.CHAOS_STORE_OUTAGE_SECONDS ?? 15)
const FUZZ = Number(process.env.CHAOS_FUZZ ?? 10_000)
const FUZZ_ONLY = process.argv.includes('--fuzz-only')
// The whole fuzz phase gives up after this many seconds; what it had not sent by then counts as unanswered.
const FUZZ_SECONDS = Number(process.env.CHAOS_FUZZ_SECONDS ?? 900)
// Spaces in the backtracking bait (the issue's figure is 5,000; fewer shortens a run against
// a parser that is still super-linear, more stresses a linear one).
const BAIT_SPACES = Number(process.env.CHAOS_BAIT_SPACES ?? 5000)
// Pass/fail targets of the fuzz phase.
const MAX_STALL_MS = 200
const MAX_RSS_BYTES = 1024 ** 3
// The caps the server is expected to hold: MAX_UPLOAD_BYTES of server/services/ingest/uploads.ts
// and 1 MB for console, token and other JSON bodies (issue 16).
const UPLOAD_CAP_BYTES = 64 * 1024 * 1024
const JSON_CAP_BYTES = 1024 * 1024
const SINK = 3490
const GONE = 3491
const ports = { A: 3400, B: 3401, C: 3402, D: 3403 } as const
const roles = { A: 'web', B: 'web', C: 'worker', D: 'worker' } as const
type Name = keyof typeof ports
const started = Date.now()
const elapsed = () => ((Date.now() - started) / 1000).toFixed(0).padStart(4)
const say = (message: string) => log(`chaos ${elapsed()} s: ${message}`)
const sleep = (ms: number) => new Promise(r => setTimeout(r, ms))

// ── Sinks ──────────────────────────────────────────────────────────────────────────────
// A copy counts as delivered when the sink's 2xx answer went out ('finish'); an answer to a
// sender that had already given up (the slow phase) does not.
const delivered = new Map<string, number>()
// The first 2xx of each webhook-id at each receiver: when (performance.now()) and its run id.
const arrivals = new Map<string, { at: number, runId: string }>()
const faults = { slow: false, storeDown: false }
// Flaky: every third message fails its first two tries. (A 500 for every third request of
// the endpoint, whatever its message, let one message draw all eight of its attempts, about
// (1/3)^8 each, so roughly one run in eleven ended a delivery dead that should have arrived.)
const flakyTries = new Map<string, { order: number, tries: number }>()
function flakyFails(id: string) {
  const seen = flakyTries.get(id) ?? { order: flakyTries.size, tries: 0 }
  seen.tries++
  flakyTries.set(id, seen)
  return seen.order % 3 === 2 && seen.tries <= 2
}
function handler(path: string, req: import('node:http').IncomingMessage, res: import('node:http').ServerResponse, body: string) {
  const id = `${path}|${String(req.headers['webhook-id'])}`
  const ok = () => {
    res.on('finish', () => {
      delivered.set(id, (delivered.get(id) ?? 0) + 1)
      if (!arrivals.has(id)) arrivals.set(id, { at: performance.now(), runId: (JSON.parse(body) as { data: { runId: string } }).data.runId })
    })
    res.writeHead(200).end()
  }
  if (path === '/never') return res.writeHead(503).end()
  if (path === '/flaky' && flakyFails(id)) return res.writeHead(500).end()
  if (path === '/slow' && faults.slow) return setTimeout(ok, 2500)
  ok()
}
function sinkServer(port: number): Promise<Server> {
  const server = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', (c: Buffer) => chunks.push(c))
    req.on('end', () => handler(req.url ?? '/', req, res, Buffer.concat(chunks).toString('utf8')))
  })
  return new Promise(resolve => server.listen(port, '127.0.0.1', () => resolve(server)))
}
const sink = await sinkServer(SINK)
let gone: Server | null = await sinkServer(GONE)

// ── The stack and three app processes of one build ─────────────────────────────────────
const appUrl = `http://127.0.0.1:${ports.A}`
const stack = await startStack({ database: 'arcwise_chaos', fresh: true, smtpPort: 2529, mailHttpPort: 2584, storePort: 4573, appUrl })
const keysFile = join(tmpdir(), `arcwise-chaos-keys-${process.pid}.json`)
await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
buildIfStale()
const env = {
  ...stack.serverEnv,
  NUXT_RATE_LIMIT_PER_MINUTE: '0',
  NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK},127.0.0.1:${GONE}`,
  // Retries over about a minute, so that the endpoints' outages (20-25 s) stay well inside it.
  NUXT_WEBHOOKS_RETRY_SCHEDULE: '1,2,3,5,8,13,20',
  NUXT_WEBHOOKS_TIMEOUT_MS: '1000',
  NUXT_WEBHOOKS_LEASE_SECONDS: '5',
  NUXT_WEBHOOKS_POLL_MS: '250',
  // An open circuit (10 failures in a row) holds an endpoint's retries until a probe is
  // received, so "never" cannot spend its schedule: it ends dead the production way, disabled
  // after failing without a success for a while (72 s here, 3 days by default), with the
  // circuit probing every 2 s (30 s by default) so the outages' backlogs resume quickly.
  NUXT_WEBHOOKS_CIRCUIT_PROBE_SECONDS: '2',
  NUXT_WEBHOOKS_DISABLE_AFTER_HOURS: '0.02',
  NUXT_DIAGNOSTICS: 'true',
}
const processes: Partial<Record<Name, ChildProcess>> = {}
const restarts: Record<string, number> = {}
// The app processes' own output (connection errors while PostgreSQL restarts, and so on)
// goes to a log beside the report, so that the table stays readable.
mkdirSync(join(root, 'reports'), { recursive: true })
const appLog = join(root, 'reports', `chaos-${new Date().toISOString().replace(/[:.]/g, '-')}-apps.log`)
const appLogFd = openSync(appLog, 'a')
function startApp(name: Name) {
  processes[name] = spawn(process.execPath, [join(root, '.output', 'server', 'index.mjs')], {
    cwd: root, stdio: ['ignore', appLogFd, appLogFd],
    env: { ...process.env, ...env, NUXT_PROCESS_ROLE: roles[name], PORT: String(ports[name]), HOST: '127.0.0.1', NODE_ENV: 'production' },
  })
}
async function killAndRestart(name: Name) {
  const child = processes[name]!
  child.kill('SIGKILL')
  await new Promise(r => child.once('exit', r))
  say(`${name} (${roles[name]}) killed with SIGKILL`)
  restarts[`${name} (${roles[name]}) killed with SIGKILL and restarted`] = (restarts[`${name} (${roles[name]}) killed with SIGKILL and restarted`] ?? 0) + 1
  await sleep(2000)
  startApp(name)
  await waitForServer(`http://127.0.0.1:${ports[name]}/api/health`)
  say(`${name} back`)
}
const appNames = (FUZZ_ONLY ? ['A', 'B'] : Object.keys(ports)) as Name[]
for (const name of appNames) startApp(name)
for (const name of appNames) await waitForServer(`http://127.0.0.1:${ports[name]}/api/health`)

const sql = postgres(stack.databaseUrl, { max: 2, onnotice: () => {} })
let exitCode: number
try {
  const keys = JSON.parse(readFileSync(keysFile, 'utf8')) as Record<string, string>
  const admin = await demoAdmin(appUrl)
  const { cookie } = admin
  const partner = await admin.partner('northgate-water')
  async function runSoak() {
    const endpointNames = ['steady-1', 'steady-2', 'steady-3', 'steady-4', 'steady-5', 'steady-6', 'steady-7', 'flaky', 'slow', 'gone', 'never'] as const
    const endpointIds: Record<string, string> = {}
    for (const name of endpointNames) {
      const port = name === 'gone' ? GONE : SINK
      const ep = await admin.call<{ id: string }>('POST', `/api/console/partners/${partner.id}/endpoints`, { url: `http://127.0.0.1:${port}/${name}`, eventTypes: ['result.released'] })
      endpointIds[name] = ep.body.id
    }

    // ── Soak ─────────────────────────────────────────────────────────────────────────────
    const inst = demoInstruments.find(i => i.slug === 'irms-north')!
    const full = inst.acquisition('x', new Date(), 4)
    // 1,500 points around the CO2 line: real work for the engine, light on the wire.
    const strongest = full.detectors[0]!.values.reduce((best, v, i, a) => (v > a[best]! ? i : best), 0)
    const from = Math.max(0, strongest - 700)
    const small = { ...full, sweep: { ...full.sweep!, values: full.sweep!.values.slice(from, from + 1500) }, detectors: [{ ...full.detectors[0]!, values: full.detectors[0]!.values.slice(from, from + 1500) }] }
    const accepted = new Set<string>()
    // When each run's acceptance reached its lab system (performance.now()): latency counts from here.
    const answeredAt = new Map<string, number>()
    const tries = { failed: 0, storeUnavailable503: 0, storeUnavailableDuringOutage: 0, storeUnavailableWithoutRetryAfter: 0, otherStatus: {} as Record<string, number>, networkErrors: 0 }
    // A lab system: sends a failed post again with the same Idempotency-Key, to the other web
    // process; after a 503 it waits the Retry-After the answer names.
    async function post(n: number) {
      const runId = `chaos-${process.pid}-${n}`
      const body = JSON.stringify({ ...small, runId, acquiredAt: new Date().toISOString() })
      const giveUp = Date.now() + 180_000
      for (let attempt = 0; Date.now() < giveUp; attempt++) {
        const target = (n + attempt) % 2 === 0 ? ports.A : ports.B
        let wait = 500
        try {
          const res = await fetch(`http://127.0.0.1:${target}/api/v1/acquisitions`, { method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${keys['saltmarsh-isotopes']}`, 'idempotency-key': runId }, body, signal: AbortSignal.timeout(10_000) })
          const text = await res.text()
          if (res.status === 201 || res.status === 200) { accepted.add(runId); answeredAt.set(runId, performance.now()); return }
          if (res.status < 500 && res.status !== 409) throw new Error(`post ${runId} answered ${res.status}: ${text.slice(0, 300)}`)
          const retryAfter = Number(res.headers.get('retry-after'))
          if (res.status === 503 && text.includes('store-unavailable')) {
            tries.storeUnavailable503++
            if (faults.storeDown) tries.storeUnavailableDuringOutage++
            if (!(retryAfter > 0)) tries.storeUnavailableWithoutRetryAfter++
          }
          else tries.otherStatus[res.status] = (tries.otherStatus[res.status] ?? 0) + 1
          if (retryAfter > 0) wait = retryAfter * 1000
        }
        catch (error) {
          if (String(error).includes('answered')) throw error
          tries.networkErrors++
        }
        tries.failed++
        await sleep(wait)
      }
      throw new Error(`post ${runId} was never accepted`)
    }
    // Phases: each fault starts one, which lasts until the next; the figures are per phase.
    const marks: { phase: string, at: number }[] = []
    const mark = (phase: string) => { marks.push({ phase, at: performance.now() }); say(phase) }
    const schedule: [number, string, () => Promise<void> | void][] = [
      [0.10, 'worker C killed (SIGKILL) and restarted', () => killAndRestart('C')],
      [0.20, `"slow" answers after the send timeout for ${STORE_OUTAGE_SECONDS + 5} s`, async () => {
        faults.slow = true
        await sleep((STORE_OUTAGE_SECONDS + 5) * 1000)
        faults.slow = false
      }],
      [0.35, 'PostgreSQL restarted', async () => { await restartCluster(); restarts['PostgreSQL restarted'] = 1; say('PostgreSQL back') }],
      [0.50, `object store stopped for ${STORE_OUTAGE_SECONDS} s, then started`, async () => {
        faults.storeDown = true
        await stack.store.stop()
        await sleep(STORE_OUTAGE_SECONDS * 1000)
        await stack.store.start()
        faults.storeDown = false
        restarts['object store stopped and started'] = 1
        say('object store back')
      }],
      [0.65, `"gone" receiver away for ${STORE_OUTAGE_SECONDS + 10} s`, async () => {
        const g = gone!
        gone = null
        g.closeAllConnections()
        await new Promise(r => g.close(r))
        await sleep((STORE_OUTAGE_SECONDS + 10) * 1000)
        gone = await sinkServer(GONE)
      }],
      [0.80, 'web B killed (SIGKILL) and restarted', () => killAndRestart('B')],
    ]
    // Each endpoint's circuit, sampled every second: how long it was open, its most failures
    // in a row, and when it was disabled. (The second 100,000 run disabled "flaky", which
    // answers 2xx to most messages; its circuit had to be watched to see why.)
    const circuits = Object.fromEntries(endpointNames.map(n => [n, { openSeconds: 0, maxConsecutiveFailures: 0, disabledAtSecond: null as number | null, disabledReason: null as string | null }]))
    const nameOf = new Map(Object.entries(endpointIds).map(([n, id]) => [id, n]))
    const circuitOpenAt = 10 // webhooks.circuitFailures, nuxt.config.ts
    const sampler = setInterval(() => {
      void sql<{ id: string, status: string, consecutive_failures: number, blocked: boolean, disabled_reason: string | null }[]>`select id, status, consecutive_failures, coalesce(blocked_until > now(), false) as blocked, disabled_reason from webhook_endpoints where id = any(${Object.values(endpointIds)}::uuid[])`
        .then((rows) => {
          for (const r of rows) {
            const c = circuits[nameOf.get(r.id)!]!
            c.maxConsecutiveFailures = Math.max(c.maxConsecutiveFailures, r.consecutive_failures)
            if (r.blocked && r.consecutive_failures >= circuitOpenAt) c.openSeconds++
            if (r.status === 'disabled' && c.disabledAtSecond === null) Object.assign(c, { disabledAtSecond: Math.round((Date.now() - soakStart) / 1000), disabledReason: r.disabled_reason })
          }
        }, () => { /* PostgreSQL restarting: the next sample reads again */ })
    }, 1000)
    const soakStart = Date.now()
    mark('steady')
    const faultRun = (async () => {
      for (const [at, what, act] of schedule) {
        await sleep(Math.max(0, soakStart + at * SECONDS * 1000 - Date.now()))
        mark(what)
        await act()
      }
    })()
    const posts: Promise<void>[] = []
    for (let n = 0; n < ACQUISITIONS; n++) {
      await sleep(Math.max(0, soakStart + n * 1000 / RATE - Date.now()))
      posts.push(post(n))
      if (n % 1000 === 999) say(`${n + 1} posted, ${accepted.size} accepted, ${arrivals.size} delivered`)
    }
    await Promise.all(posts)
    await faultRun
    say(`soak over: ${accepted.size} acquisitions accepted (${tries.failed} failed tries, sent again)`)
    mark('settle (posting over)')

    // ── Settle: every owed delivery succeeds or dies ─────────────────────────────────────
    const settleDeadline = Date.now() + Math.max(240, SECONDS / 2) * 1000
    for (;;) {
      const [{ pending }] = await sql<[{ pending: number }]>`select count(*)::int as pending from deliveries where status = 'pending'`
      if (pending === 0 || Date.now() > settleDeadline) break
      await sleep(1000)
    }
    const settledAt = performance.now()
    clearInterval(sampler)
    const [counts] = await sql`select
      (select count(*)::int from events) as events,
      (select count(*)::int from deliveries where event_id is not null) as owed,
      (select count(*)::int from deliveries where status = 'pending') as pending,
      (select count(*)::int from deliveries where status = 'succeeded') as succeeded`
    const deadRows = await sql`select e.url from deliveries d join webhook_endpoints e on e.id = d.endpoint_id where d.status = 'dead'`
    const succeededRows = await sql`select d.id, e.url from deliveries d join webhook_endpoints e on e.id = d.endpoint_id where d.status = 'succeeded' and d.event_id is not null`
    const owedToNever = (await sql`select count(*)::int as n from deliveries where endpoint_id = ${endpointIds.never!}`)[0]!.n as number
    const deliveredDistinct = delivered.size
    const duplicates = [...delivered.values()].reduce((s, n) => s + n - 1, 0)
    // A run that reached one receiver under two webhook-ids would be a duplicate the partner
    // could not recognise.
    const idsPerRun = new Map<string, number>()
    for (const [key, { runId }] of arrivals) {
      const runAtEndpoint = `${key.slice(0, key.indexOf('|'))}|${runId}`
      idsPerRun.set(runAtEndpoint, (idsPerRun.get(runAtEndpoint) ?? 0) + 1)
    }
    const runsUnderTwoIds = [...idsPerRun.values()].filter(n => n > 1).length
    const dead = deadRows.length
    const deadElsewhere = deadRows.filter(r => !String(r.url).endsWith('/never')).length
    const lost = counts!.owed - deliveredDistinct - dead
    const succeededUnseen = succeededRows.filter(r => !delivered.has(`${new URL(String(r.url)).pathname}|${r.id}`)).length
    say(`ledger: ${counts!.owed} owed, ${deliveredDistinct} delivered, ${dead} dead, ${lost} lost; reading the raw data back from the store`)

    // ── Raw data: every accepted acquisition's two objects read back and hashed ──────────
    const s3 = new S3Client({ region: stack.store.env.NUXT_STORE_REGION!, endpoint: stack.store.env.NUXT_STORE_ENDPOINT!, forcePathStyle: true, credentials: { accessKeyId: stack.store.env.NUXT_STORE_ACCESS_KEY_ID!, secretAccessKey: stack.store.env.NUXT_STORE_SECRET_ACCESS_KEY! } })
    const stored = await sql<{ runId: string, rawSha256: string | null, arraysSha256: string | null }[]>`select external_id as "runId", raw_sha256 as "rawSha256", arrays_sha256 as "arraysSha256" from acquisitions where external_id like ${`chaos-${process.pid}-%`}`
    const storedByRun = new Map(stored.map(r => [r.runId, r]))
    const rawData = { checked: 0, readable: 0, missingRow: 0, notInStore: 0, unreadable: [] as string[] }
    const readBack = async (key: string, sha: string) => {
      const object = await s3.send(new GetObjectCommand({ Bucket: stack.store.bucket, Key: key }))
      const bytes = await object.Body!.transformToByteArray()
      return createHash('sha256').update(bytes).digest('hex') === sha
    }
    const readLimit = pLimit(16)
    await Promise.all([...accepted].map(runId => readLimit(async () => {
      rawData.checked++
      const row = storedByRun.get(runId)
      if (!row) { rawData.missingRow++; return }
      if (!row.rawSha256 || !row.arraysSha256) { rawData.notInStore++; return }
      try {
        if (await readBack(`raw/${row.rawSha256}`, row.rawSha256) && await readBack(`arrays/${row.arraysSha256}`, row.arraysSha256)) rawData.readable++
        else if (rawData.unreadable.length < 20) rawData.unreadable.push(`${runId}: hash differs`)
      }
      catch (error) { if (rawData.unreadable.length < 20) rawData.unreadable.push(`${runId}: ${String(error).slice(0, 200)}`) }
    })))
    s3.destroy()

    // ── Per phase: deliveries/s at the receivers, ingest answer → receipt, 503s ─────────
    const steadyPaths = new Set(endpointNames.filter(n => n.startsWith('steady')).map(n => `/${n}`))
    const bounds = [...marks.map(m => m.at), settledAt]
    const phaseOf = (t: number) => { for (let i = marks.length - 1; i >= 0; i--) if (t >= marks[i]!.at) return i; return 0 }
    const perPhase = marks.map((m, i) => ({ phase: m.phase, seconds: (bounds[i + 1]! - m.at) / 1000, received: 0, steadyMs: [] as number[], allMs: [] as number[] }))
    for (const [key, { at, runId }] of arrivals) {
      perPhase[phaseOf(at)]!.received++
      const answered = answeredAt.get(runId)
      if (answered === undefined) continue
      const ms = Math.max(0, at - answered)
      const p = perPhase[phaseOf(answered)]!
      p.allMs.push(ms)
      if (steadyPaths.has(key.slice(0, key.indexOf('|')))) p.steadyMs.push(ms)
    }
    const phases = perPhase.map((p) => {
      p.steadyMs.sort((a, b) => a - b)
      p.allMs.sort((a, b) => a - b)
      return {
        phase: p.phase, seconds: Math.round(p.seconds), deliveriesPerSecond: Math.round(p.received / Math.max(p.seconds, 0.001)),
        // Runs answered in this phase: their deliveries to the steady endpoints, and to all.
        steadyIngestToReceiptMs: { p50: Math.round(quantile(p.steadyMs, 0.5)), p99: Math.round(quantile(p.steadyMs, 0.99)), n: p.steadyMs.length },
        allIngestToReceiptMs: { p50: Math.round(quantile(p.allMs, 0.5)), p99: Math.round(quantile(p.allMs, 0.99)), n: p.allMs.length },
      }
    })
    const soak = {
      acquisitions: ACQUISITIONS, ratePerSecond: RATE, seconds: Math.round(SECONDS), storeOutageSeconds: STORE_OUTAGE_SECONDS, processes: roles, endpoints: endpointNames.length,
      acquisitionsAccepted: accepted.size, eventsIngested: counts!.events, deliveriesOwed: counts!.owed, delivered: deliveredDistinct,
      duplicates, runsUnderTwoWebhookIds: runsUnderTwoIds, dead, deadExpected: owedToNever, deadElsewhere, stillPending: counts!.pending, succeededButNotReceived: succeededUnseen, lost,
      posts: tries, restarts, rawData, phases, circuits,
    }
    const soakChecks = {
      'the soak ingested and delivered something': accepted.size > 0 && deliveredDistinct > 0 && owedToNever > 0,
      'lost = 0': lost === 0,
      'duplicates only with the same webhook-id': runsUnderTwoIds === 0,
      'dead = deliveries to "never"': dead === owedToNever && deadElsewhere === 0,
      'no endpoint but "never" disabled (each of the others answers 2xx)': Object.entries(circuits).every(([n, c]) => n === 'never' || c.disabledAtSecond === null),
      'nothing still pending': counts!.pending === 0,
      'every succeeded delivery was received': succeededUnseen === 0,
      'every accepted acquisition has its event': counts!.events === accepted.size,
      'every acquisition posted was accepted': accepted.size === ACQUISITIONS,
      'uploads during the store outage answered 503 with Retry-After': tries.storeUnavailableDuringOutage > 0 && tries.storeUnavailableWithoutRetryAfter === 0,
      'every accepted acquisition\'s raw data read back from the store': rawData.readable === accepted.size,
    }
    return { soak, soakChecks }
  }
  const soakRun = FUZZ_ONLY ? null : await runSoak()
  if (soakRun) {
    // Fresh A and B, so that their peak RSS (a process's high-water mark) is the fuzz's own.
    for (const name of ['A', 'B'] as const) {
      const child = processes[name]!
      child.kill('SIGTERM')
      await new Promise(r => child.once('exit', r))
      startApp(name)
      await waitForServer(`http://127.0.0.1:${ports[name]}/api/health`)
    }
    say('A and B restarted for the fuzz phase')
  }

  // ── Fuzz ─────────────────────────────────────────────────────────────────────────────
  const [lab] = await sql`select id from labs where slug = 'saltmarsh-isotopes'`
  const [viewer] = await sql`select id from users where role = 'viewer' limit 1`
  const target = { labId: lab!.id, instrumentSlug: 'irms-north', labKey: keys['saltmarsh-isotopes']!, partnerId: partner.id, userId: viewer!.id, cookie, allowedHosts: [`127.0.0.1:${SINK}`, `127.0.0.1:${GONE}`] }
  const requests = fc.sample(badRequests(target), { numRuns: FUZZ, seed: 20261202 })
  const exhaustion = exhaustionRequests(target, { uploadBytes: UPLOAD_CAP_BYTES, jsonBytes: JSON_CAP_BYTES, baitSpaces: BAIT_SPACES })
  say(`fuzz: ${exhaustion.length} requests built to exhaust, then ${requests.length} generated bad requests`)
  const fuzzBases = [`http://127.0.0.1:${ports.A}`, `http://127.0.0.1:${ports.B}`]
  const exits: string[] = []
  for (const name of ['A', 'B'] as const) processes[name]!.once('exit', (code, signal) => exits.push(`${name} exited (${signal ?? code}) during the fuzz`))
  await Promise.all(fuzzBases.map(base => fetch(`${base}/_bench/diagnostics`, { method: 'DELETE' })))
  // The hub's token signing key is made on first use; a deployment has it long before a bad
  // request comes, so it is made here rather than counted as written by one.
  await fetch(`${fuzzBases[0]}/.well-known/jwks.json`)
  const before = await rowCounts(sql)
  const fuzzDeadline = Date.now() + FUZZ_SECONDS * 1000
  const fuzz = { requests: exhaustion.length + requests.length, serverErrors: 0, notProblem: 0, accepted: 0, unanswered: 0, leaks: 0, examples: [] as string[] }
  const tally = (outcome: FuzzOutcome, what: string) => {
    const bad = outcome.status >= 500 || outcome.status < 400 || !outcome.problem || outcome.leak
    if (outcome.status === 0) fuzz.unanswered++
    else if (outcome.status >= 500) fuzz.serverErrors++
    else if (outcome.status < 400) fuzz.accepted++
    if (outcome.status >= 400 && !outcome.problem) fuzz.notProblem++
    if (outcome.leak) fuzz.leaks++
    if (bad && fuzz.examples.length < 20) fuzz.examples.push(`${outcome.status || outcome.error}${outcome.leak ? ' (names a prototype function)' : ''}: ${what}`)
  }
  /** An app process's diagnostics reading (server/utils/diagnostics.ts); infinite figures if it cannot be read. */
  const diagnosticsOf = async (base: string) => {
    try { return await (await fetch(`${base}/_bench/diagnostics`, { signal: AbortSignal.timeout(10_000) })).json() as { eventLoopDelayMaxMs: number, peakRssBytes: number, pid: number } }
    catch (error) { return { error: String(error), eventLoopDelayMaxMs: Number.POSITIVE_INFINITY, peakRssBytes: Number.POSITIVE_INFINITY, pid: 0 } }
  }
  /** The process's worst event-loop delay since the last reading, then reset. */
  const readStall = async (base: string) => {
    const { eventLoopDelayMaxMs } = await diagnosticsOf(base)
    await fetch(`${base}/_bench/diagnostics`, { method: 'DELETE', signal: AbortSignal.timeout(10_000) }).catch(() => {})
    return eventLoopDelayMaxMs
  }
  /** Waits, until the fuzz deadline, for a process held up by a request to answer again. */
  const answering = async (base: string) => {
    while (Date.now() < fuzzDeadline) {
      try { if ((await fetch(`${base}/api/health`, { signal: AbortSignal.timeout(5000) })).ok) return true }
      catch { /* still busy */ }
      await sleep(1000)
    }
    return false
  }

  // 1. Built to exhaust: each process gets every other request, one at a time, so that a
  //    request that holds a process up is seen alone; after one that got no answer, the next
  //    waits until the process answers again.
  //    Each process's worst event-loop delay is read and reset after each of these, so that a
  //    stall is charged to the request that caused it (stallMs per category, the request named).
  const byCategory: Record<string, { requests: number, answeredRight: number, worst: string[], stallMs: number, stalledBy?: string }> = {}
  let exhaustionStallMs = 0
  const chunked: { why: string, status: number, sentBytes: number, error?: string }[] = []
  await Promise.all(fuzzBases.map(async (base, lane) => {
    for (const [i, { request, category }] of exhaustion.entries()) {
      if (i % 2 !== lane) continue
      const outcome = Date.now() < fuzzDeadline && await answering(base)
        ? await sendExhaustion(base, request, Math.min(60_000, Math.max(1000, fuzzDeadline - Date.now())))
        : { status: 0, problem: false, leak: false, error: 'not sent: the fuzz phase ran out of time' }
      tally(outcome, `[${category}] ${request.why}: ${request.method} ${request.path}`)
      const c = byCategory[category] ??= { requests: 0, answeredRight: 0, worst: [], stallMs: 0 }
      c.requests++
      const stallMs = await readStall(base)
      exhaustionStallMs = Math.max(exhaustionStallMs, stallMs)
      if (stallMs > c.stallMs) Object.assign(c, { stallMs: Math.round(stallMs), stalledBy: request.why })
      // A body past the cap is answered right only with 413.
      if (outcome.status >= 400 && outcome.status < 500 && outcome.problem && !outcome.leak && (!('chunked' in request) || outcome.status === 413)) c.answeredRight++
      else if (c.worst.length < 5) c.worst.push(`${outcome.status || outcome.error}: ${request.why}`)
      if ('chunked' in request) chunked.push({ why: request.why, status: outcome.status, sentBytes: outcome.sentBytes ?? 0, ...(outcome.error ? { error: outcome.error } : {}) })
    }
  }))
  const stillAnswering = await Promise.all(fuzzBases.map(answering))
  say(`fuzz: exhaustion requests done (${Object.entries(byCategory).map(([k, v]) => `${k} ${v.answeredRight}/${v.requests}, worst stall ${v.stallMs} ms`).join('; ')})`)

  // 2. Generated bad requests, 16 at a time, each with 30 s to answer.
  const limit = pLimit(16)
  await Promise.all(requests.map((r, i) => limit(async () => {
    const outcome = Date.now() < fuzzDeadline
      ? await sendBadRequest(fuzzBases[i % 2]!, r, 30_000)
      : { status: 0, problem: false, leak: false, error: 'not sent: the fuzz phase ran out of time' }
    tally(outcome, `${r.why}: ${r.method} ${r.path} ${r.body?.slice(0, 100) ?? ''}`)
  })))
  await sleep(1500) // anything a refused request set going in the background
  const written = rowsWritten(before, await rowCounts(sql))
  const rowsWrittenByRejected = Object.values(written).reduce((s, n) => s + Math.abs(n), 0)
  // Measured inside each app process: the worst event-loop delay since the last reading (the
  // generated requests') and the process's peak RSS (A and B started fresh before the fuzz).
  const diagnostics = await Promise.all(fuzzBases.map(diagnosticsOf))
  // The generated requests' worst beside the exhaustion requests' (read one by one above).
  const worstStallMs = Math.max(exhaustionStallMs, ...diagnostics.map(d => d.eventLoopDelayMaxMs))
  const peakRssBytes = Math.max(...diagnostics.map(d => d.peakRssBytes))
  const chunkedAnswered413 = chunked.filter(c => c.status === 413).length

  const checks = {
    ...(soakRun?.soakChecks ?? {}),
    'fuzz: 5xx = 0': fuzz.serverErrors === 0,
    'fuzz: non-problem errors = 0': fuzz.notProblem === 0,
    'fuzz: rows written by rejected = 0': rowsWrittenByRejected === 0,
    'fuzz: none accepted': fuzz.accepted === 0,
    'fuzz: every request answered (60 s for exhaustion requests, 30 s for the rest)': fuzz.unanswered === 0,
    'fuzz: bodies past the cap, chunked, answered 413': chunkedAnswered413 === chunked.length,
    'fuzz: no answer names a prototype function': fuzz.leaks === 0,
    [`fuzz: worst event-loop stall < ${MAX_STALL_MS} ms`]: worstStallMs < MAX_STALL_MS,
    'fuzz: peak RSS < 1 GB': peakRssBytes < MAX_RSS_BYTES,
    'fuzz: app processes alive and answering': exits.length === 0 && stillAnswering.every(Boolean),
  }
  exitCode = Object.values(checks).every(Boolean) ? 0 : 1
  const mb = (bytes: number) => Number.isFinite(bytes) ? Math.round(bytes / 1024 / 1024) : 'no answer'
  const report = {
    kind: 'chaos', at: new Date().toISOString(), node: process.version, cores: cpus().length, fuzzOnly: FUZZ_ONLY, soak: soakRun?.soak ?? null,
    fuzz: {
      ...fuzz, rowsWrittenByRejected, rowsByTable: written, worstEventLoopStallMs: worstStallMs, peakRssBytes,
      perProcess: diagnostics, exits, baitSpaces: BAIT_SPACES, exhaustion: { byCategory, chunked },
    },
    checks,
  }
  const file = join(root, 'reports', `chaos-${report.at.replace(/[:.]/g, '-')}.json`)
  writeFileSync(file, JSON.stringify(report, null, 2))
  console.log('\n  Arcwise chaos report')
  const soak = soakRun?.soak
  console.table({
    ...(soak
      ? {
          'events ingested': soak.eventsIngested, 'deliveries owed': soak.deliveriesOwed, 'delivered': soak.delivered, 'duplicates (same webhook-id)': soak.duplicates,
          'dead': soak.dead, 'dead expected ("never" endpoint)': soak.deadExpected, 'lost': soak.lost,
          'posts answered 503 store-unavailable (during the outage)': `${soak.posts.storeUnavailable503} (${soak.posts.storeUnavailableDuringOutage})`,
          'raw data read back from the store': `${soak.rawData.readable} of ${soak.acquisitionsAccepted}`,
        }
      : {}),
    'fuzz requests': fuzz.requests, 'fuzz 5xx': fuzz.serverErrors, 'fuzz non-problem errors': fuzz.notProblem, 'fuzz rows written by rejected': rowsWrittenByRejected,
    'fuzz unanswered': fuzz.unanswered, 'fuzz chunked past the cap answered 413': `${chunkedAnswered413} of ${chunked.length}`,
    'fuzz worst event-loop stall (ms)': Number.isFinite(worstStallMs) ? Math.round(worstStallMs) : 'no answer', 'fuzz peak RSS (MB)': mb(peakRssBytes),
  })
  if (soak) {
    console.table(Object.fromEntries(soak.phases.map(p => [p.phase, {
      's': p.seconds, 'deliveries/s': p.deliveriesPerSecond,
      'steady p50 ms': p.steadyIngestToReceiptMs.p50, 'steady p99 ms': p.steadyIngestToReceiptMs.p99, 'all p99 ms': p.allIngestToReceiptMs.p99,
    }])))
    console.log(`  restarts: ${Object.entries(soak.restarts).map(([k, v]) => `${k} ×${v}`).join('; ')}`)
    console.log(`  circuits (s open, most failures in a row, disabled at s): ${Object.entries(soak.circuits).map(([n, c]) => `${n} ${c.openSeconds}/${c.maxConsecutiveFailures}${c.disabledAtSecond === null ? '' : `/${c.disabledAtSecond}`}`).join(', ')}`)
  }
  for (const [check, ok] of Object.entries(checks)) console.log(`  ${ok ? 'ok  ' : 'FAIL'} ${check}`)
  if (fuzz.examples.length) console.log(`  examples:\n    ${fuzz.examples.join('\n    ')}`)
  console.log(`  report: ${file}\n  app processes' log: ${appLog}`)
}
catch (error) {
  console.error(error)
  exitCode = 1
}
finally {
  // Bounded: once (2026-12-03, 22:23 UTC, after a full run's report) sql.end() waited on its
  // connections for minutes with every check met, holding the machine's shared lock; postgres.js
  // closes what is left after the timeout (seconds).
  await sql.end({ timeout: 5 })
  for (const child of Object.values(processes)) child?.kill('SIGTERM')
  await sleep(500)
  await stack.stop()
  sink.close()
  gone?.close()
}
process.exit(exitCode)
