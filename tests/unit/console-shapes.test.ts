// The console restates no answer shape: its fetches are typed by Nitro from the route handlers
// (app/types/api.ts names them), and every table goes through the one shell, ConsoleTable.
// A hand-written `useFetch<…>` / `$fetch<…>` or a URL cast `as string` (which switches the
// route typing off) fails here, as does a <table> written outside the shell.
import { readdirSync, readFileSync, existsSync } from 'node:fs'
import { join, relative } from 'node:path'
import { describe, expect, it } from 'vitest'

const root = join(import.meta.dirname, '..', '..')
function sources(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap(e => e.isDirectory() ? sources(join(dir, e.name)) : /\.(vue|ts)$/.test(e.name) ? [join(dir, e.name)] : [])
}
const app = sources(join(root, 'app')).map(file => ({ file: relative(root, file), text: readFileSync(file, 'utf8') }))

// Each remaining generic names an inferred type where inference falls short (DEVELOPERS.md says why).
const allowedGenerics: [file: string, generic: string][] = [
  ['app/components/calibration/CalibrationFromReferenceForm.vue', '$fetch<CalibrationProposal>'],
  ['app/pages/console/partners/[id]/deliveries/[deliveryId].vue', 'useFetch<Answer<\'/api/console/partners/:id/deliveries/:deliveryId\'>>'],
  ['app/pages/console/labs/[id]/instruments/[instrumentId].vue', 'useFetch<InstrumentDetail>'],
  // The public verify route's answer, named by its zod schema (shared/schemas/certificates.ts).
  ['app/pages/console/certificates/verify.vue', '$fetch<CertificateVerdict>'],
  // A path built from the organisation's kind, past the same depth limit.
  ['app/components/org/OrgForm.vue', '$fetch<SavedOrg>'],
  ['app/components/org/OrgForm.vue', '$fetch<CreatedOrg>'],
  // Seven-segment paths, past TypeScript's depth limit like calibrations/preview.
  ['app/pages/console/labs/[id]/reprocess-jobs/[jobId].vue', '$fetch<CancelledReprocessJob>'],
  ['app/pages/console/labs/[id]/reprocess-jobs/[jobId].vue', '$fetch<ReleasedCorrection>'],
  // The cursor-list composable, over several routes: each caller names the item by its route's
  // inferred answer (app/types/api.ts) or the zod schema the handler answers with.
  ['app/composables/useCursorList.ts', 'useFetch<CursorPage<T>>'],
  ['app/composables/useCursorList.ts', '$fetch<CursorPage<T>>'],
  // An attempt's signature check: eight segments, named by its route's inferred answer.
  ['app/pages/console/partners/[id]/deliveries/[deliveryId].vue', '$fetch<Answer<\'/api/console/partners/:id/deliveries/:deliveryId/attempts/:attemptId/signature\'>>'],
]

describe('console shapes are defined once', () => {
  it('writes no fetch generic beyond those that name an inferred type', () => {
    const found = app.flatMap(({ file, text }) => [...text.matchAll(/(?<![\w$])(?:useFetch|useLazyFetch|\$fetch)<[^(]*\(/g)].map(m => `${file} ${m[0].slice(0, -1)}`))
    expect(found.sort()).toEqual([...allowedGenerics].map(([file, generic]) => `${file} ${generic}`).sort())
  })

  it('casts no fetched URL to string', () => {
    const casts = app.filter(({ text }) => text.split('\n').some(line => /(?:useFetch|\$fetch)[<(]/.test(line) && line.includes(' as string')))
    expect(casts.map(c => c.file)).toEqual([])
  })

  it('keeps no hand-written view module', () => {
    expect(existsSync(join(root, 'shared', 'types', 'views.ts'))).toBe(false)
  })

  it('writes every table through ConsoleTable', () => {
    const tables = app.filter(({ file, text }) => !file.endsWith('ConsoleTable.vue') && /<table[\s>]/.test(text))
    expect(tables.map(t => t.file)).toEqual([])
  })
})
