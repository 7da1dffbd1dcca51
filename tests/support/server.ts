import { spawn, type ChildProcess } from 'node:child_process'
import { join } from 'node:path'
import { setup, url } from '@nuxt/test-utils/e2e'
import postgres from 'postgres'
import { afterAll, expect } from 'vitest'
import { rootDir, testEnv } from './env'

const chromiumArgs = ['--no-sandbox', '--headless', '--disable-gpu', '--disable-quic', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run']

// Test files change things as the demo admin far faster than a person could (the role matrix
// makes dozens of changes a second): the per-user console change limit is lifted here and
// tested on its own, at 5 a minute, in tests/api/proxy.test.ts.
const testLimits = { NUXT_RATE_LIMIT_CONSOLE_PER_MINUTE: '1000000' }

/**
 * One more process of the built server on `port`, against the test database (a second web
 * process, or a worker with NUXT_PROCESS_ROLE); the caller stops it.
 */
export function startAppProcess(port: number, env: Record<string, string> = {}): ChildProcess {
  return spawn(process.execPath, [join(rootDir, '.output', 'server', 'index.mjs')], {
    env: { ...process.env, ...testEnv().serverEnv, ...testLimits, ...env, PORT: String(port), HOST: '127.0.0.1', NODE_ENV: 'production' },
    stdio: 'ignore',
  })
}

/** Starts the built server (built once by scripts/test.ts) for this test file. */
export async function useArcwise(opts: { browser?: boolean, env?: Record<string, string> } = {}) {
  const env = testEnv()
  await setup({
    rootDir,
    build: false,
    server: true,
    port: env.appPort,
    env: { ...env.serverEnv, ...testLimits, ...opts.env },
    // Nitro's options are not in the NuxtConfig type that this tsconfig sees.
    nuxtConfig: { nitro: { output: { dir: join(rootDir, '.output') } } } as Record<string, unknown>,
    browser: opts.browser ?? false,
    browserOptions: { type: 'chromium', launch: { executablePath: '/usr/bin/chromium', args: chromiumArgs } },
  })
}

let sql: postgres.Sql | undefined
/** A direct connection to the test database, to check what a request stored (or did not). */
export function testDb(): postgres.Sql {
  if (!sql) {
    sql = postgres(testEnv().databaseUrl, { max: 2, onnotice: () => {} })
    afterAll(async () => { await sql?.end(); sql = undefined })
  }
  return sql
}

export interface ApiResponse<T = any> { status: number, body: T, headers: Headers }

/** A problem document for 429 with a Retry-After of 1..60 seconds. */
export function expectRateLimited(res: ApiResponse) {
  expect(res.status).toBe(429)
  expect(res.headers.get('content-type')).toContain('application/problem+json')
  expect(res.body).toMatchObject({ status: 429, type: 'urn:arcwise:problem:rate-limited' })
  const retryAfter = Number(res.headers.get('retry-after'))
  expect(retryAfter).toBeGreaterThanOrEqual(1)
  expect(retryAfter).toBeLessThanOrEqual(60)
}

/** A console client: keeps the session cookie it is given, like a browser would. */
export class ConsoleClient {
  cookie = ''

  async request<T = any>(method: string, path: string, body?: unknown, headers: Record<string, string> = {}): Promise<ApiResponse<T>> {
    const res = await fetch(url(path), {
      method,
      headers: { ...(body !== undefined ? { 'content-type': 'application/json' } : {}), ...(this.cookie ? { cookie: this.cookie } : {}), ...headers },
      body: body === undefined ? undefined : typeof body === 'string' ? body : JSON.stringify(body),
      redirect: 'manual',
    })
    const setCookie = res.headers.getSetCookie().find(c => c.startsWith('nuxt-session='))
    if (setCookie) this.cookie = setCookie.split(';')[0]!
    const text = await res.text()
    let parsed: unknown = text
    try { parsed = text ? JSON.parse(text) : null }
    catch { /* not JSON: keep the text */ }
    return { status: res.status, body: parsed as T, headers: res.headers }
  }

  get = <T = any>(path: string) => this.request<T>('GET', path)
  post = <T = any>(path: string, body?: unknown) => this.request<T>('POST', path, body ?? {})
  patch = <T = any>(path: string, body: unknown) => this.request<T>('PATCH', path, body)
  delete = <T = any>(path: string) => this.request<T>('DELETE', path)

  async signIn(email: string, password: string) {
    const res = await this.post('/api/console/session', { email, password })
    if (res.status !== 200) throw new Error(`sign-in as ${email} answered ${res.status}: ${JSON.stringify(res.body)}`)
    return this
  }
}

/** Messages the SMTP fake captured for `to`, newest first. */
export async function mailTo(to: string): Promise<{ subject: string, text: string }[]> {
  const all = await (await fetch(testEnv().mailUrl)).json() as { to: string[], subject: string, text: string }[]
  return all.filter(m => m.to.includes(to))
}

/** Waits for the outbox to hand a message to the SMTP fake. */
export async function waitForMail(to: string, subject: RegExp, timeoutMs = 15_000) {
  const deadline = Date.now() + timeoutMs
  for (;;) {
    const found = (await mailTo(to)).find(m => subject.test(m.subject))
    if (found) return found
    if (Date.now() > deadline) throw new Error(`no mail "${subject}" to ${to} within ${timeoutMs} ms`)
    await new Promise(r => setTimeout(r, 200))
  }
}

export function linkIn(text: string, path: string): string {
  const match = text.match(new RegExp(`https?://\\S+${path}/[A-Za-z0-9_-]{43}`))
  if (!match) throw new Error(`no ${path} link in mail:\n${text}`)
  return match[0]
}

let counter = 0
export function unique(prefix: string) {
  counter++
  return `${prefix}-${Date.now().toString(36)}-${counter}`
}
