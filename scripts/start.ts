// `npm start`: PostgreSQL, migrations, the demo seed (once), the SMTP fake, a fresh build
// when the sources changed, and the server on http://localhost:3000. Ctrl-C stops it all.
import { buildIfStale } from './lib/build'
import { log } from './lib/paths'
import { printDemoSignIns, seedDemo } from './lib/seed'
import { mailFile, startServer, startStack } from './lib/services'

const port = Number(process.env.PORT ?? 3000)
const appUrl = `http://localhost:${port}`
const stack = await startStack({ database: 'arcwise', smtpPort: 2525, mailHttpPort: 2580, appUrl, mailFile })
let stopping = false
const running: { server?: ReturnType<typeof startServer> } = {}
async function stop(code: number) {
  if (stopping) return
  stopping = true
  running.server?.kill('SIGTERM')
  await stack.stop()
  process.exit(code)
}
process.on('SIGINT', () => void stop(0))
process.on('SIGTERM', () => void stop(0))

try {
  await seedDemo(stack.databaseUrl)
  buildIfStale()
}
catch (error) {
  console.error(error)
  await stop(1)
}
running.server = startServer(stack.serverEnv, port)
running.server.on('exit', (code) => { if (!stopping) void stop(code ?? 1) })
printDemoSignIns(appUrl)
log('press Ctrl-C to stop')
