// `npm run bench:fairness`: delivery to realistic receivers, where one partner's slow or broken
// endpoints must not delay the others (issue 22). Prints one JSON object.
//
// Twenty labs each send their results to one healthy endpoint of their own (answering after
// 50 to 150 ms); acquisitions are posted open-loop at 200 a second, round-robin over the labs,
// and each is timed from its ingest answer to its receipt at the lab's endpoint. First the
// healthy endpoints run alone; then three more endpoints take every lab's results: one answers
// after 10 s, one never answers (the worker's timeout ends each send), one answers 503. Goals:
// the healthy endpoints' p99 under 1 s with the bad ones present, and no healthy endpoint's
// p99 more than twice its p99 alone; the bad endpoints hold only their own send slots and the
// failing ones are retried on schedule (behind their circuits).
import { createHash, randomBytes } from 'node:crypto'
import { createServer } from 'node:http'
import { cpus, tmpdir } from 'node:os'
import { join } from 'node:path'
import { setTimeout as sleep } from 'node:timers/promises'
import postgres from 'postgres'
import { buildIfStale } from './lib/build'
import { cpuByProcess, cpuShares } from './lib/cpu'
import { demoInstruments, thousandPointAcquisition } from './lib/demo-instruments'
import { demoAdmin } from './lib/console-client'
import { quantile } from './lib/open-loop'
import { log } from './lib/paths'
import { seedDemo } from './lib/seed'
import { everyQcCode } from './lib/demo'
import { startServer, startStack, waitForServer } from './lib/services'

const PORT = 3300
const SINK_PORT = 3392
const base = `http://127.0.0.1:${PORT}`
const HEALTHY = 20
const SLOW_MS = 10_000

export async function benchFairness(opts: { rate?: number, seconds?: number } = {}) {
  const rate = opts.rate ?? 200
  const seconds = opts.seconds ?? Number(process.env.BENCH_FAIRNESS_SECONDS ?? 10)
  // When each run's result reached its lab's healthy endpoint, and the bad endpoints' traffic.
  const arrived = new Map<string, number>()
  const bad = { slow: { received: 0, open: 0, mostOpen: 0 }, never: { received: 0, open: 0, mostOpen: 0 }, unavailable: { received: 0, open: 0, mostOpen: 0 } }
  const sink = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      const path = req.url!
      const kind = path.slice(1) as keyof typeof bad
      if (kind in bad) {
        const b = bad[kind]
        b.received++
        b.open++
        b.mostOpen = Math.max(b.mostOpen, b.open)
        res.on('close', () => b.open--)
        if (kind === 'slow') setTimeout(() => res.writeHead(200).end(), SLOW_MS)
        else if (kind === 'unavailable') res.writeHead(503).end()
        return // 'never': the worker's timeout ends it
      }
      const at = performance.now()
      const runId = (JSON.parse(Buffer.concat(chunks).toString()) as { data: { runId: string } }).data.runId
      if (!arrived.has(runId)) arrived.set(runId, at)
      // Healthy endpoint i answers after 50 + 100·i/19 ms.
      setTimeout(() => res.writeHead(200).end(), 50 + 100 * Number(path.split('/')[2]) / (HEALTHY - 1))
    })
  })
  sink.keepAliveTimeout = 60_000
  await new Promise<void>(resolve => sink.listen(SINK_PORT, '127.0.0.1', resolve))
  const stack = await startStack({ database: 'arcwise_bench', fresh: true, smtpPort: 2527, mailHttpPort: 2582, storePort: 4572, appUrl: base })
  const keysFile = join(tmpdir(), `arcwise-bench-keys-${process.pid}.json`)
  await seedDemo(stack.databaseUrl, { keysFile, releaseAll: true })
  const labs = await benchLabs(stack.databaseUrl)
  buildIfStale()
  // The hub's defaults for concurrency, per-endpoint limits, timeout and retries.
  const server = startServer({ ...stack.serverEnv, NUXT_RATE_LIMIT_PER_MINUTE: '0', NUXT_WEBHOOKS_ALLOW_HOSTS: `127.0.0.1:${SINK_PORT}` }, PORT)
  const db = postgres(stack.databaseUrl, { max: 1, onnotice: () => {} })
  try {
    await waitForServer(`${base}/api/health`)
    const admin = await demoAdmin(base)
    const partner = await admin.partner('northgate-water')
    const endpointsPath = `/api/console/partners/${partner.id}/endpoints`
    const addEndpoint = async (path: string, labIds: string[] = []) => {
      const res = await admin.call<{ id: string }>('POST', endpointsPath, { url: `http://127.0.0.1:${SINK_PORT}${path}`, labIds })
      if (res.status !== 201) throw new Error(`creating ${path} answered ${res.status}`)
      return res.body.id
    }
    for (let i = 0; i < HEALTHY; i++) await addEndpoint(`/healthy/${i}`, [labs[i]!.id])
    const template = thousandPointAcquisition(demoInstruments.find(i => i.slug === 'irms-north')!, 'x')
    const post = (lab: number, runId: string) => fetch(`${base}/api/v1/acquisitions`, {
      method: 'POST', headers: { 'content-type': 'application/json', 'authorization': `Bearer ${labs[lab]!.key}` }, body: JSON.stringify({ ...template, runId }),
    }).then(async (res) => {
      await res.arrayBuffer()
      if (res.status !== 201) throw new Error(`posting an acquisition answered ${res.status}`)
      return performance.now()
    })
    for (let w = 0; w < 40; w++) await post(w % HEALTHY, `fair-warm-${process.pid}-${w}`)

    /** Posts at `rate` for `seconds`, round-robin over the labs; each healthy endpoint's delays from the ingest answer to receipt. */
    const phase = async (name: string) => {
      const count = rate * seconds
      const answered = new Map<string, { at: number, lab: number }>()
      const posts: Promise<void>[] = []
      const cpuBefore = cpuByProcess(server.pid!)
      const started = performance.now()
      for (let n = 0; n < count; n++) {
        const runId = `fair-${name}-${process.pid}-${n}`
        await sleep(Math.max(0, started + n * 1000 / rate - performance.now()))
        posts.push(post(n % HEALTHY, runId).then((at) => { answered.set(runId, { at, lab: n % HEALTHY }) }))
      }
      await Promise.all(posts)
      const postedPerSecond = Math.round(count / ((performance.now() - started) / 1000))
      const deadline = performance.now() + 30_000
      while ([...answered.keys()].some(id => !arrived.has(id)) && performance.now() < deadline) await sleep(20)
      const cpu = cpuShares(cpuBefore, cpuByProcess(server.pid!), (performance.now() - started) / 1000)
      const delays = (filter: (lab: number) => boolean) => [...answered].filter(([id, a]) => filter(a.lab) && arrived.has(id)).map(([id, a]) => Math.max(0, arrived.get(id)! - a.at)).sort((x, y) => x - y)
      const summary = (sorted: number[]) => ({ p50: Math.round(quantile(sorted, 0.5)), p99: Math.round(quantile(sorted, 0.99)), max: Math.round(sorted.at(-1) ?? NaN) })
      const all = delays(() => true)
      return {
        events: count, postedPerSecond, received: all.length, ms: summary(all), cpuPercent: cpu,
        byEndpoint: Array.from({ length: HEALTHY }, (_, i) => summary(delays(lab => lab === i))),
      }
    }

    log(`fairness: ${HEALTHY} healthy endpoints alone, ${rate} events/s for ${seconds} s`)
    const alone = await phase('alone')
    await addEndpoint('/slow')
    await addEndpoint('/never')
    const unavailableId = await addEndpoint('/unavailable')
    log('fairness: the same with an endpoint answering after 10 s, one never answering and one answering 503')
    const withBad = await phase('bad')
    const ratios = withBad.byEndpoint.map((b, i) => b.p99 / Math.max(1, alone.byEndpoint[i]!.p99))
    const worst = Math.max(...ratios)
    // Retried on schedule: no second attempt of a 503'd delivery came before the first step
    // of the schedule (5 s, less its 10 % jitter).
    const [retries] = await db`
      select count(*)::int as retried, coalesce(min(extract(epoch from b.at - a.at)), 0)::float8 as "earliestRetryS"
      from delivery_attempts a join delivery_attempts b on b.delivery_id = a.delivery_id and b.number = a.number + 1
      join deliveries d on d.id = a.delivery_id where d.endpoint_id = ${unavailableId}`
    const [circuit] = await db`select consecutive_failures as "consecutiveFailures", blocked_until is not null and blocked_until > now() as open from webhook_endpoints where id = ${unavailableId}`
    const p99Met = withBad.received === withBad.events && withBad.ms.p99 < 1000
    return {
      healthyEndpoints: HEALTHY, eventsPerSecond: rate, seconds,
      alone: { ...alone, byEndpoint: undefined },
      withBadEndpoints: { ...withBad, byEndpoint: undefined },
      p99: { goal: 'healthy p99 < 1 s with the bad endpoints', met: p99Met },
      worstEndpointP99Ratio: { value: Number(worst.toFixed(2)), endpoint: ratios.indexOf(worst), alone: alone.byEndpoint[ratios.indexOf(worst)]!, withBad: withBad.byEndpoint[ratios.indexOf(worst)]!, goal: '<= 2', met: worst <= 2 },
      badEndpoints: {
        slow10s: { received: bad.slow.received, mostInFlight: bad.slow.mostOpen },
        neverAnswers: { received: bad.never.received, mostInFlight: bad.never.mostOpen },
        answers503: { received: bad.unavailable.received, retried: retries!.retried, earliestRetrySeconds: Number(Number(retries!.earliestRetryS).toFixed(2)), circuit },
      },
    }
  }
  finally {
    await db.end()
    // The held sends end at once (the worker records them as failed) rather than at their timeouts.
    sink.closeAllConnections()
    server.kill('SIGTERM')
    await new Promise(resolve => server.once('exit', resolve))
    await stack.stop()
    await new Promise<void>(resolve => sink.close(() => resolve()))
  }
}

/** Twenty labs like the demo's carbonate lab (its instrument, geometry and calibration), each with a key and a grant to the demo regulator. */
async function benchLabs(databaseUrl: string) {
  const sql = postgres(databaseUrl, { max: 1, onnotice: () => {} })
  try {
    return await sql.begin(async (tx) => {
      const [src] = await tx`select i.id from instruments i join labs l on l.id = i.lab_id where l.slug = 'saltmarsh-isotopes' and i.slug = 'irms-north'`
      const [partner] = await tx`select id from partners where slug = 'northgate-water'`
      const out: { id: string, key: string }[] = []
      for (let i = 0; i < HEALTHY; i++) {
        // Released at once, as seedDemo's releaseAll does: a lab's default is review by a person,
        // and with it nothing reached a partner (every healthy endpoint received 0 on 2026-12-04).
        const [lab] = await tx`insert into labs (slug, name, site, contact_email, release_policy, auto_release_allows)
                               values (${`bench-lab-${i}`}, ${`Bench lab ${i}`}, 'Bench', ${`lab${i}@bench.example`}, 'auto', ${everyQcCode}) returning id`
        const [inst] = await tx`insert into instruments (lab_id, slug, name) values (${lab!.id}, 'irms-north', 'North bench IRMS') returning id`
        await tx`insert into geometry_versions (instrument_id, version, kind, params, valid_from, note) select ${inst!.id}, version, kind, params, valid_from, note from geometry_versions where instrument_id = ${src!.id}`
        await tx`insert into calibrations (instrument_id, version, fit, points, valid_from) select ${inst!.id}, version, fit, points, valid_from from calibrations where instrument_id = ${src!.id}`
        // The API's key format, as the demo seed makes them: awk_<prefix>_<secret>.
        const prefix = randomBytes(9).toString('base64url')
        const key = `awk_${prefix}_${randomBytes(32).toString('base64url')}`
        await tx`insert into api_keys (lab_id, name, prefix, secret_hash, scopes) values (${lab!.id}, 'bench', ${prefix}, ${createHash('sha256').update(key).digest('hex')}, ${['acquisitions:write']})`
        await tx`insert into grants (lab_id, partner_id, event_types) values (${lab!.id}, ${partner!.id}, ${['result.released']})`
        out.push({ id: lab!.id as string, key })
      }
      return out
    })
  }
  finally { await sql.end() }
}

if (import.meta.url === `file://${process.argv[1]}`) {
  log('fairness benchmark (npx tsx scripts/bench-fairness.ts): this takes about a minute')
  console.log(JSON.stringify({ benchmark: 'fairness', node: process.version, cores: cpus().length, ...await benchFairness() }, null, 2))
}
