import { applyPartitionRetention, defaultPartitionRows, ensureMonths } from './maintenance'

/** The partition settings (runtimeConfig.partitions, NUXT_PARTITIONS_*), as numbers. */
export function partitionSettings() {
  const p = useRuntimeConfig().partitions
  return {
    monthsAhead: Number(p.monthsAhead),
    attemptMonths: Number(p.keepAttemptMonths),
    deliveryMonths: Number(p.keepDeliveryMonths),
  }
}

/**
 * Worker processes, every runtimeConfig.partitions.checkMinutes (and at start): months made
 * ahead, rows found in the default partitions moved into their new month, and months past
 * their retention dropped. Everything made, moved or dropped is logged, and so are rows that
 * still sit in a default partition.
 */
export async function maintainPartitions() {
  const settings = partitionSettings()
  const sql = useSql()
  const months = await ensureMonths(sql, { monthsAhead: settings.monthsAhead })
  const retention = await applyPartitionRetention(sql, settings)
  const log = useLog()
  if (months.created.length) log.info({ created: months.created }, 'monthly partitions made')
  for (const m of months.moved) log.warn({ ...m }, 'rows moved from a default partition into their month')
  for (const d of retention.dropped) log.info({ ...d }, 'partition dropped under retention')
  for (const k of retention.keptPending) log.info({ ...k }, 'month past retention kept: it holds pending deliveries')
  for (const d of [...months.deferred, ...retention.deferred]) log.warn({ ...d }, 'partition change deferred to the next run')
  for (const d of await defaultPartitionRows(sql)) log.warn({ ...d }, 'rows in a default partition (a month without its partition)')
  return { months, retention }
}

let running: Promise<unknown> | undefined
export function kickPartitions() {
  running ??= maintainPartitions()
    .catch(error => logError('[partitions] maintenance failed', error))
    .finally(() => { running = undefined })
}
