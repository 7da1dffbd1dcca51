// Background work of each app process: exchange schemas registered at start, the mail
// outbox flushed every few seconds, deferred uploads and webhook deliveries picked up, and
// the database client closed when the server stops. A `web` process (NUXT_PROCESS_ROLE)
// leaves the background work to `worker` processes.
export default defineNitroPlugin((nitro) => {
  const background = useRuntimeConfig().processRole !== 'web'
  // The exchange schemas this build speaks are registered (idempotently) at start.
  registerExchangeSchemas().catch(error => logError('[schemas] registration failed', error))
  // Mail and deferred uploads are picked up every few seconds (and right after they are queued).
  const timer = setInterval(() => {
    if (background) {
      kickMailOutbox()
      kickUploads()
    }
    flushSchemaUses().catch(error => logError('[schemas] usage flush failed', error))
  }, 5000)
  timer.unref()
  // Raw-data retention per lab (server/services/store): worker processes, every retentionMinutes.
  const retentionMs = Number(useRuntimeConfig().store.retentionMinutes) * 60_000
  const retention = background && retentionMs > 0 ? setInterval(kickRetention, retentionMs) : undefined
  retention?.unref()
  // Monthly partitions (server/services/partitions): at start, then every checkMinutes.
  const partitionsMs = Number(useRuntimeConfig().partitions.checkMinutes) * 60_000
  if (background && partitionsMs > 0) kickPartitions()
  const partitions = background && partitionsMs > 0 ? setInterval(kickPartitions, partitionsMs) : undefined
  partitions?.unref()
  if (background) startDeliveryWorker()
  // Reprocessing jobs (server/services/reprocessing); NUXT_REPROCESS_WORKER=false leaves them to other processes.
  if (background && reprocessWorkerOn()) startReprocessWorker()
  nitro.hooks.hook('close', async () => {
    clearInterval(timer)
    clearInterval(retention)
    clearInterval(partitions)
    // Leases this process holds are handed back, so another worker need not wait them out.
    if (background) await stopDeliveryWorker().catch(error => logError('[delivery] stop failed', error))
    if (background && reprocessWorkerOn()) await stopReprocessWorker().catch(error => logError('[reprocess] stop failed', error))
    await flushSchemaUses().catch(() => {})
    await closeDb()
    closeStore()
  })
})

function reprocessWorkerOn() {
  return String(useRuntimeConfig().reprocess.worker) !== 'false'
}
