// The OpenAPI document: generated from the zod schemas, committed, valid, and complete.
import { readdirSync, readFileSync, statSync } from 'node:fs'
import { join, relative } from 'node:path'
import { validate } from '@readme/openapi-parser'
import { describe, expect, it } from 'vitest'
import { buildOpenApiDocument } from '../../shared/openapi'
import { rootDir } from '../support/env'

const committed = JSON.parse(readFileSync(join(rootDir, 'openapi', 'openapi.json'), 'utf8'))

function* routeFiles(dir: string): Generator<string> {
  for (const entry of readdirSync(dir)) {
    const path = join(dir, entry)
    if (statSync(path).isDirectory()) yield* routeFiles(path)
    else if (entry.endsWith('.ts')) yield path
  }
}

/** server/api/v1/acquisitions/[id]/result.get.ts -> ['get', '/api/v1/acquisitions/{id}/result'] */
function routeOf(file: string): [string, string] {
  const rel = relative(join(rootDir, 'server'), file).replace(/\\/g, '/')
  const match = /^(.*?)(?:\/index)?\.(get|post|put|patch|delete)\.ts$/.exec(rel)
  if (!match) throw new Error(`route file without a method: ${rel}`)
  return [match[2]!, `/${match[1]!.replace(/\[([^[\]]+)\]/g, '{$1}')}`]
}

describe('OpenAPI 3.1 document', () => {
  it('is up to date with the schemas (run `npm run openapi` when this fails)', () => {
    expect(JSON.parse(JSON.stringify(buildOpenApiDocument()))).toEqual(committed)
  })

  it('passes a general-purpose OpenAPI validator (@readme/openapi-parser)', async () => {
    const result = await validate(structuredClone(committed))
    expect(result.valid, JSON.stringify('errors' in result ? result.errors : [])).toBe(true)
  })

  it('documents every route under server/api/v1 and the JWKS', () => {
    const routes = [...routeFiles(join(rootDir, 'server', 'api', 'v1'))].map(routeOf)
    routes.push(routeOf(join(rootDir, 'server', 'routes', '.well-known', 'jwks.json.get.ts')).map(x => x.replace('/routes', '')) as [string, string])
    const documented = Object.entries(committed.paths as Record<string, Record<string, unknown>>).flatMap(([p, ops]) => Object.keys(ops).map(m => `${m} ${p}`))
    const missing = routes.map(([m, p]) => `${m} ${p.replace(/^\/routes/, '')}`).filter(r => !documented.includes(r))
    expect(missing).toEqual([])
    expect(routes.length).toBeGreaterThanOrEqual(10)
  })

  it('carries the caution about the lab\'s quality system', () => {
    expect(committed.info.description).toContain('quality system')
  })
})
