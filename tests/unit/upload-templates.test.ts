import { readFileSync } from 'node:fs'
import { join } from 'node:path'
import { describe, expect, it } from 'vitest'
import { uploadTemplates } from '../../scripts/lib/uploadTemplates'

const dir = join(import.meta.dirname, '..', '..', 'public', 'templates')

describe('the upload templates the console offers', () => {
  it.each(Object.entries(uploadTemplates()))('%s is up to date (run `npx tsx scripts/upload-templates.ts` when this fails)', (name, text) => {
    expect(readFileSync(join(dir, name), 'utf8')).toBe(text)
  })

  it('the CSV template shows every metadata line the docs describe, the ratio line included', () => {
    const csv = uploadTemplates()['acquisition.csv']!
    for (const key of ['instrument', 'runId', 'acquiredAt', 'sampleRef', 'acceleratingVoltage', 'formulas', 'ratio']) expect(csv).toMatch(new RegExp(`^# ${key}: `, 'm'))
    expect(csv).toContain('\nfield [T],detector [fA]\n')
  })
})
