// `npm test`: the same bootstrap as `npm start` against its own database, then lint,
// typecheck, the build, and every test project. Exits non-zero on any failure.
import { spawn, spawnSync } from 'node:child_process'
import { existsSync, readFileSync, rmSync } from 'node:fs'
import { join } from 'node:path'
import { buildIfStale } from './lib/build'
import { log, root } from './lib/paths'
import { seedDemo } from './lib/seed'
import { startStack } from './lib/services'

// ARCWISE_TEST_APP_PORT moves the test server off 3100 (a server left running there by another checkout).
export const testPorts = { app: Number(process.env.ARCWISE_TEST_APP_PORT || 3100), smtp: 2526, mailHttp: 2581, store: 4571 }

function ensureChromium() {
  if (existsSync('/usr/bin/chromium')) return
  if (process.getuid?.() !== 0) throw new Error('Browser tests need Debian\'s Chromium: sudo apt-get install chromium')
  log('installing Debian\'s chromium for the browser tests')
  for (const args of [['update', '-qq'], ['install', '-y', '-qq', 'chromium']]) {
    const r = spawnSync('apt-get', args, { stdio: 'inherit', env: { ...process.env, DEBIAN_FRONTEND: 'noninteractive' } })
    if (r.status !== 0) throw new Error(`apt-get ${args.join(' ')} failed`)
  }
}

const bin = (name: string) => join(root, 'node_modules', '.bin', name)
const failures: string[] = []
let summary = ''
// Asynchronous, so that the SMTP fake in this process keeps answering while tests run.
async function step(name: string, cmd: string, args: string[], env: Record<string, string> = {}) {
  log(`— ${name}`)
  const code = await new Promise<number | null>((resolve) => {
    const child = spawn(cmd, args, { cwd: root, stdio: 'inherit', env: { ...process.env, ...env } })
    child.on('exit', resolve)
  })
  if (code !== 0) failures.push(name)
}

ensureChromium()
const appUrl = `http://127.0.0.1:${testPorts.app}`
const stack = await startStack({ database: 'arcwise_test', fresh: true, smtpPort: testPorts.smtp, mailHttpPort: testPorts.mailHttp, storePort: testPorts.store, appUrl })
try {
  await seedDemo(stack.databaseUrl)
  await step('lint', bin('eslint'), ['.'])
  await step('typecheck', bin('nuxi'), ['typecheck'])
  await step('typecheck scripts and tests', bin('tsc'), ['-p', 'tsconfig.tools.json'])
  buildIfStale()
  const testEnv = JSON.stringify({ serverEnv: stack.serverEnv, databaseUrl: stack.databaseUrl, mailUrl: stack.mail.httpUrl, appPort: testPorts.app, appUrl })
  const report = join(root, 'test-results', 'vitest.json')
  rmSync(report, { force: true })
  await step('tests', bin('vitest'), ['run', '--reporter=default', '--reporter=json', `--outputFile.json=${report}`, ...process.argv.slice(2)], { ARCWISE_TEST_ENV: testEnv })
  if (existsSync(report)) {
    const r = JSON.parse(readFileSync(report, 'utf8')) as { numPassedTests: number, numFailedTests: number, numPendingTests: number }
    summary = `tests: ${r.numPassedTests} passed, ${r.numFailedTests} failed, ${r.numPendingTests} skipped`
  }
}
catch (error) {
  console.error(error)
  failures.push('bootstrap')
}
finally {
  await stack.stop()
}
if (failures.length) log(`FAILED: ${failures.join(', ')}`)
else log('all checks passed')
// The plain closing line CI reads: "N passed, N failed".
if (summary) console.log(summary)
process.exit(failures.length ? 1 : 0)
