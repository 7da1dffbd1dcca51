// `npm run dev`: the same services as `npm start`, with `nuxt dev` (hot reload) on port 3000.
import { spawn } from 'node:child_process'
import { join } from 'node:path'
import { log, root } from './lib/paths'
import { demoKeysFile, printDemoSignIns, seedDemo } from './lib/seed'
import { mailFile, startStack } from './lib/services'

const stack = await startStack({ database: 'arcwise', smtpPort: 2525, mailHttpPort: 2580, storePort: 4570, appUrl: 'http://localhost:3000', mailFile })
await seedDemo(stack.databaseUrl, { keysFile: demoKeysFile })
const dev = spawn(join(root, 'node_modules', '.bin', 'nuxt'), ['dev', '--port', '3000'], { cwd: root, stdio: 'inherit', env: { ...process.env, ...stack.serverEnv } })
printDemoSignIns('http://localhost:3000')
const stop = async () => { dev.kill('SIGTERM'); await stack.stop(); process.exit(0) }
process.on('SIGINT', () => void stop())
process.on('SIGTERM', () => void stop())
dev.on('exit', () => void stop())
log('press Ctrl-C to stop')
