import { setTimeout as sleep } from 'node:timers/promises'
import { Logger, run, runMigrations } from 'graphile-worker'
import postgres from 'postgres'
import { Agent, request } from 'undici'
import { cpuByProcess, cpuShares } from './cpu'

// The delivery benchmark's peer: graphile-worker 0.16 (the PostgreSQL job queue for Node.js;
// 0.17 needs Node 22) delivering the same signed messages as Arcwise's worker, at the same
// concurrency, against the same database: one job per message, each job posting it and
// recording its attempt in a table of its own, as a hub built on that queue would.

export interface PeerMessage { headers: Record<string, string>, body: string }

/**
 * Queues every message as a job (not timed), then runs graphile-worker until the sink has
 * received them all (`received()`), timed as Arcwise's drain is: from the start to the last
 * receipt. Its per-job logging is silenced, or it would measure the console.
 */
export async function drainThroughPeer(opts: { databaseUrl: string, url: string, messages: PeerMessage[], concurrency: number, received: () => number, serverPid: number }) {
  const silent = new Logger(() => () => {})
  await runMigrations({ connectionString: opts.databaseUrl, logger: silent })
  const sql = postgres(opts.databaseUrl, { max: 1, onnotice: () => {} })
  const agent = new Agent({ connections: 64 })
  try {
    await sql`create table if not exists bench_peer_attempts (id bigserial primary key, webhook_id text not null, status_code int not null, duration_ms int not null, at timestamptz not null default now())`
    for (let i = 0; i < opts.messages.length; i += 500) {
      const chunk = JSON.stringify(opts.messages.slice(i, i + 500))
      await sql`select count(*) from graphile_worker.add_jobs(array(
        select row('deliver', p, null, null, null, null, null, null)::graphile_worker.job_spec from json_array_elements(${chunk}::text::json) p))`
    }
    const cpuBefore = cpuByProcess(opts.serverPid)
    const started = performance.now()
    const runner = await run({
      connectionString: opts.databaseUrl, concurrency: opts.concurrency, logger: silent, noHandleSignals: true,
      taskList: {
        deliver: async (payload, helpers) => {
          const m = payload as PeerMessage
          const t = performance.now()
          const res = await request(opts.url, { method: 'POST', headers: m.headers, body: m.body, dispatcher: agent })
          await res.body.dump()
          if (res.statusCode >= 300) throw new Error(`the sink answered ${res.statusCode}`)
          await helpers.query('insert into bench_peer_attempts (webhook_id, status_code, duration_ms) values ($1, $2, $3)', [m.headers['webhook-id'], res.statusCode, Math.round(performance.now() - t)])
        },
      },
    })
    const deadline = started + 300_000
    while (opts.received() < opts.messages.length && performance.now() < deadline) await sleep(5)
    const seconds = (performance.now() - started) / 1000
    const cpu = cpuShares(cpuBefore, cpuByProcess(opts.serverPid), seconds)
    // Every job finished (graphile-worker deletes a completed job) before the runner stops.
    while (performance.now() < deadline && (await sql`select count(*)::int as n from graphile_worker._private_jobs`)[0]!.n > 0) await sleep(20)
    await runner.stop()
    const [recorded] = await sql`select count(distinct webhook_id)::int as n from bench_peer_attempts`
    return { seconds, cpu, recorded: recorded!.n as number }
  }
  finally {
    await agent.close()
    await sql.end()
  }
}
