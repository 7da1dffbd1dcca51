// `npm run db:sizes`: each partitioned table's months (deliveries, delivery_attempts, acquisitions, results) with
// PostgreSQL's row estimate and bytes (table + indexes + TOAST), a total per table and in all,
// and the rows that sit in a default partition (months without their partition). `--json`
// prints one JSON object instead. DATABASE_URL, or npm start's database.
import { parseArgs } from 'node:util'
import { defaultPartitionRows, partitionSizes, partitionedTables } from '../server/services/partitions/maintenance'
import { runDatabaseCommand } from './lib/database-command'

const { values } = parseArgs({ options: { json: { type: 'boolean', default: false } } })
// With --json, stdout carries the JSON alone: the cluster's progress lines go to stderr.
const print = console.log
if (values.json) console.log = console.error
await runDatabaseCommand(async ({ sql }) => {
  const months = await partitionSizes(sql)
  const inDefault = await defaultPartitionRows(sql)
  const tables = partitionedTables.map(table => ({
    table,
    rowEstimate: months.filter(m => m.table === table).reduce((s, m) => s + m.rowEstimate, 0),
    bytes: months.filter(m => m.table === table).reduce((s, m) => s + m.bytes, 0),
  }))
  const total = { rowEstimate: tables.reduce((s, t) => s + t.rowEstimate, 0), bytes: tables.reduce((s, t) => s + t.bytes, 0) }
  if (values.json) {
    print(JSON.stringify({ months, tables, total, inDefault }, null, 2))
  }
  else {
    const mb = (b: number) => `${(b / 1048576).toFixed(2)} MB`
    const lines = [['table', 'month', 'rows (estimate)', 'bytes', 'size']]
    for (const m of months) lines.push([m.table, m.month, String(m.rowEstimate), String(m.bytes), mb(m.bytes)])
    for (const t of tables) lines.push([t.table, 'all', String(t.rowEstimate), String(t.bytes), mb(t.bytes)])
    lines.push(['total', '', String(total.rowEstimate), String(total.bytes), mb(total.bytes)])
    const widths = lines[0]!.map((_, i) => Math.max(...lines.map(l => l[i]!.length)))
    for (const l of lines) console.log(l.map((c, i) => i >= 2 ? c.padStart(widths[i]!) : c.padEnd(widths[i]!)).join('  '))
    for (const d of inDefault) console.log(`${d.rows} row(s) of ${d.table} for ${d.month} sit in ${d.table}_default: npm run db:partitions makes months and moves them`)
  }
})
