import { dirname, join } from 'node:path'
import { fileURLToPath } from 'node:url'

export interface TestEnv { serverEnv: Record<string, string>, databaseUrl: string, mailUrl: string, appPort: number, appUrl: string }

export const rootDir = join(dirname(fileURLToPath(import.meta.url)), '..', '..')

/** What scripts/test.ts started for the API and browser tests. */
export function testEnv(): TestEnv {
  const raw = process.env.ARCWISE_TEST_ENV
  if (!raw) throw new Error('API and browser tests run under `npm test`, which starts PostgreSQL, the SMTP fake and the server.')
  return JSON.parse(raw) as TestEnv
}
