import { defineConfig } from 'vitest/config'

// unit and reference run anywhere; api and browser need the stack that scripts/test.ts
// starts (PostgreSQL, the SMTP fake, the built server) and run one file at a time.
export default defineConfig({
  test: {
    projects: [
      { test: { name: 'unit', include: ['tests/unit/**/*.test.ts', 'tests/reference/**/*.test.ts'] } },
      { test: { name: 'api', include: ['tests/api/**/*.test.ts'], fileParallelism: false, testTimeout: 60_000, hookTimeout: 120_000 } },
      { test: { name: 'browser', include: ['tests/browser/**/*.test.ts'], fileParallelism: false, testTimeout: 120_000, hookTimeout: 180_000 } },
    ],
  },
})
