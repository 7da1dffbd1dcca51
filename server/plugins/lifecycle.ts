// Background work of each app process: the mail outbox is flushed every few seconds, and
// the database client is closed when the server stops.
export default defineNitroPlugin((nitro) => {
  const timer = setInterval(() => kickMailOutbox(), 5000)
  timer.unref()
  nitro.hooks.hook('close', async () => {
    clearInterval(timer)
    await closeDb()
  })
})
