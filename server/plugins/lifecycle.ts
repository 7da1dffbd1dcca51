// Background work of each app process: exchange schemas registered at start, the mail
// outbox flushed every few seconds, and the database client closed when the server stops.
export default defineNitroPlugin((nitro) => {
  // The exchange schemas this build speaks are registered (idempotently) at start.
  registerExchangeSchemas().catch(error => console.error('[schemas] registration failed', error))
  // Mail and deferred uploads are picked up every few seconds (and right after they are queued).
  const timer = setInterval(() => {
    kickMailOutbox()
    kickUploads()
    flushSchemaUses().catch(error => console.error('[schemas] usage flush failed', error))
  }, 5000)
  timer.unref()
  nitro.hooks.hook('close', async () => {
    clearInterval(timer)
    await flushSchemaUses().catch(() => {})
    await closeDb()
  })
})
