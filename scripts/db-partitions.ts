// `npm run db:partitions`: makes the monthly partitions of deliveries and delivery_attempts, and
// of acquisitions and results (never dropped: the labs' records),
// from this month to NUXT_PARTITIONS_MONTHS_AHEAD (default 2) months ahead, or from `--from
// YYYY-MM` as well, moving any rows a default partition holds for them (each move printed),
// then, with `--retention`, drops months past NUXT_PARTITIONS_KEEP_ATTEMPT_MONTHS /
// NUXT_PARTITIONS_KEEP_DELIVERY_MONTHS (0 keeps all; months holding a pending delivery are
// kept). Worker processes do the same every NUXT_PARTITIONS_CHECK_MINUTES. DATABASE_URL, or
// npm start's database.
import { parseArgs } from 'node:util'
import { applyPartitionRetention, defaultPartitionRows, ensureMonths } from '../server/services/partitions/maintenance'
import { runDatabaseCommand } from './lib/database-command'
import { log } from './lib/paths'

const { values } = parseArgs({ options: { 'retention': { type: 'boolean', default: false }, 'from': { type: 'string' }, 'months-ahead': { type: 'string' } } })
const count = (name: string, raw: string | undefined, fallback: number) => {
  const n = raw === undefined || raw === '' ? fallback : Number(raw)
  if (!Number.isInteger(n) || n < 0) throw new Error(`${name} must be a whole number, 0 or more`)
  return n
}
if (values.from !== undefined && !/^\d{4}-(0[1-9]|1[0-2])$/.test(values.from)) throw new Error('--from must be a month, YYYY-MM')
await runDatabaseCommand(async ({ sql }) => {
  const monthsAhead = count('--months-ahead', values['months-ahead'] ?? process.env.NUXT_PARTITIONS_MONTHS_AHEAD, 2)
  const months = await ensureMonths(sql, { monthsAhead, from: values.from })
  log(months.created.length ? `partitions made: ${months.created.join(', ')}` : 'every month\'s partitions were there')
  for (const m of months.moved) log(`moved ${m.rows} row(s) of ${m.table} for ${m.month} out of ${m.table}_default into their month`)
  for (const d of months.deferred) log(`not made now (${d.reason}): ${d.month}; run again`)
  if (values.retention) {
    const settings = {
      attemptMonths: count('NUXT_PARTITIONS_KEEP_ATTEMPT_MONTHS', process.env.NUXT_PARTITIONS_KEEP_ATTEMPT_MONTHS, 0),
      deliveryMonths: count('NUXT_PARTITIONS_KEEP_DELIVERY_MONTHS', process.env.NUXT_PARTITIONS_KEEP_DELIVERY_MONTHS, 0),
    }
    const r = await applyPartitionRetention(sql, settings)
    for (const d of r.dropped) log(`dropped ${d.table} for ${d.month} (${d.rows} row(s))`)
    for (const k of r.keptPending) log(`kept ${k.month}: ${k.pending} pending deliver${k.pending === 1 ? 'y' : 'ies'}`)
    for (const d of r.deferred) log(`not dropped now (${d.reason}): ${d.month}; run again`)
    if (!r.dropped.length) log('nothing past its retention was dropped')
  }
  for (const d of await defaultPartitionRows(sql)) log(`${d.rows} row(s) of ${d.table} for ${d.month} sit in ${d.table}_default (no partition for that month; --from ${d.month} makes it)`)
})
