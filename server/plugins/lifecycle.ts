// Background work of each app process: exchange schemas registered at start, the mail
// outbox flushed every few seconds, and the database client closed when the server stops.
export default defineNitroPlugin((nitro) => {
  // The exchange schemas this build speaks are registered (idempotently) at start.
  registerExchangeSchemas().catch(error => console.error('[schemas] registration failed', error))
  const timer = setInterval(() => kickMailOutbox(), 5000)
  timer.unref()
  nitro.hooks.hook('close', async () => {
    clearInterval(timer)
    await closeDb()
  })
})
