#!/usr/bin/env node
// Entry point of `npm start`, `npm test` and `npm run dev`. Plain JavaScript with no
// dependencies, because on a fresh clone nothing is installed yet: it installs what is
// missing (npm ci) and then hands over to the TypeScript script of the same name.
import { spawnSync, spawn } from 'node:child_process'
import { existsSync, statSync } from 'node:fs'
import { dirname, join } from 'node:path'
import { fileURLToPath } from 'node:url'

const root = join(dirname(fileURLToPath(import.meta.url)), '..')
const command = process.argv[2]
if (!['start', 'test', 'dev'].includes(command)) {
  console.error('usage: node scripts/run.mjs start|test|dev')
  process.exit(2)
}

const lock = join(root, 'package-lock.json')
const installed = join(root, 'node_modules', '.package-lock.json')
if (!existsSync(installed) || statSync(installed).mtimeMs < statSync(lock).mtimeMs) {
  console.log('[arcwise] installing dependencies (npm ci)')
  const r = spawnSync('npm', ['ci', '--no-audit', '--no-fund'], { cwd: root, stdio: 'inherit' })
  if (r.status !== 0) process.exit(r.status ?? 1)
}

const tsx = join(root, 'node_modules', '.bin', 'tsx')
const child = spawn(tsx, [join(root, 'scripts', `${command}.ts`), ...process.argv.slice(3)], { cwd: root, stdio: 'inherit' })
// The TypeScript script stops what it started; a signal sent to this process alone is
// passed on to it (Ctrl-C in a terminal reaches both).
for (const signal of ['SIGINT', 'SIGTERM']) process.on(signal, () => { child.kill(signal) })
child.on('exit', (code, signal) => process.exit(code ?? (signal ? 1 : 0)))
