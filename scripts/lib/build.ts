import { spawnSync } from 'node:child_process'
import { createHash } from 'node:crypto'
import { existsSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs'
import { join, relative } from 'node:path'
import { log, root } from './paths'

const inputs = ['app', 'server', 'shared', 'nuxt.config.ts', 'tailwind.config.ts', 'package-lock.json', 'openapi']
const stampFile = join(root, '.output', 'arcwise-build.json')

function* files(path: string): Generator<string> {
  if (!existsSync(path)) return
  if (statSync(path).isFile()) { yield path; return }
  for (const entry of readdirSync(path).sort()) yield* files(join(path, entry))
}

/** A hash of everything the build reads, to tell whether .output is stale. */
export function sourceHash(): string {
  const hash = createHash('sha256')
  for (const input of inputs) {
    for (const file of files(join(root, input))) {
      hash.update(relative(root, file))
      hash.update(readFileSync(file))
    }
  }
  return hash.digest('hex')
}

export function buildIfStale() {
  const hash = sourceHash()
  const current = existsSync(stampFile) ? JSON.parse(readFileSync(stampFile, 'utf8')).hash : null
  if (current === hash && existsSync(join(root, '.output', 'server', 'index.mjs'))) {
    log('build is up to date')
    return
  }
  log('building Arcwise (nuxt build)')
  const r = spawnSync(join(root, 'node_modules', '.bin', 'nuxt'), ['build'], { cwd: root, stdio: 'inherit' })
  if (r.status !== 0) throw new Error('nuxt build failed')
  writeFileSync(stampFile, JSON.stringify({ hash, builtAt: new Date().toISOString() }))
}
