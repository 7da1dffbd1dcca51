// `npm start`: PostgreSQL, migrations, the demo seed (once), the SMTP fake, a fresh build
// when the sources changed, and the server on http://localhost:3000. Ctrl-C stops it all.
import { buildIfStale } from './lib/build'
import { log } from './lib/paths'
import { postDemoHistory } from './lib/lab-system'
import { postDemoArgonSequences, postDemoSequences } from './lib/demo-sequences'
import { reviewDemo } from './lib/demo-review'
import { demoKeysFile, printDemoSignIns, readDemoKeys, seedDemo } from './lib/seed'
import { mailFile, startServer, startStack, waitForServer } from './lib/services'
import { createDemoEndpoints, demoEndpointSecrets } from './lib/demo-webhooks'
import { startReceiver } from './lib/receiver'

const port = Number(process.env.PORT ?? 3000)
const appUrl = `http://localhost:${port}`
const stack = await startStack({ database: 'arcwise', smtpPort: 2525, mailHttpPort: 2580, storePort: 4570, appUrl, mailFile })
// The demo partner receiver, the one loopback address the SSRF guard lets webhooks reach here.
const receiver = await startReceiver(2590, demoEndpointSecrets)
let stopping = false
const running: { server?: ReturnType<typeof startServer> } = {}
async function stop(code: number) {
  if (stopping) return
  stopping = true
  running.server?.kill('SIGTERM')
  await receiver.close()
  await stack.stop()
  process.exit(code)
}
process.on('SIGINT', () => void stop(0))
process.on('SIGTERM', () => void stop(0))

let seeded = false
try {
  seeded = await seedDemo(stack.databaseUrl, { keysFile: demoKeysFile })
  buildIfStale()
}
catch (error) {
  console.error(error)
  await stop(1)
}
running.server = startServer({ ...stack.serverEnv, NUXT_LOG_LEVEL: process.env.NUXT_LOG_LEVEL ?? 'info', NUXT_WEBHOOKS_ALLOW_HOSTS: '127.0.0.1:2590' }, port)
running.server.on('exit', (code) => { if (!stopping) void stop(code ?? 1) })
await waitForServer(`http://127.0.0.1:${port}/api/health`)
if (seeded) {
  log(`made ${await createDemoEndpoints(`http://127.0.0.1:${port}`, receiver.url)} demo webhook endpoints`)
  // The demo's acquisitions go in through the API, as a lab system would post them.
  log(`posted ${await postDemoHistory(`http://127.0.0.1:${port}`, readDemoKeys())} demo acquisitions`)
  // Four months of CO2 sequences with standards: normalised δ for the partner, control charts with one violation.
  const saltmarshKey = readDemoKeys()['saltmarsh-isotopes']
  if (saltmarshKey) log(`posted ${await postDemoSequences(`http://127.0.0.1:${port}`, saltmarshKey)} demo CO2 sequences`)
  const halvardKey = readDemoKeys()['halvard-ridge']
  if (halvardKey) log(`posted ${await postDemoArgonSequences(`http://127.0.0.1:${port}`, halvardKey)} demo argon sequences`)
  const review = await reviewDemo(`http://127.0.0.1:${port}`, saltmarshKey)
  log(`demo review: ${review.released} results released (${review.retracted} since retracted), ${review.rejected} rejected, ${review.held} held; ${review.sequences} sequences released; ${review.certificates} certificates issued`)
}
printDemoSignIns(appUrl)
log(`demo partner receiver (webhooks arriving): ${receiver.url}/`)
log('simulate a lab system: npm run lab:simulate -- --lab saltmarsh-isotopes --rate 1 --count 10')
log('press Ctrl-C to stop')

