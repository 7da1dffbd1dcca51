import { fileURLToPath } from 'node:url'
import { scryptParams } from './shared/passwordHashing'

// The problem-document handler runs before Nuxt's own error page handler, so API routes
// answer RFC 9457 JSON while pages keep Nuxt's error page.
const problemErrorHandler = fileURLToPath(new URL('./server/error.ts', import.meta.url))

export default defineNuxtConfig({
  compatibilityDate: '2026-11-01',
  devtools: { enabled: false },
  telemetry: false,
  modules: ['@nuxtjs/tailwindcss', '@pinia/nuxt', 'nuxt-auth-utils', '@nuxt/eslint', '@scalar/nuxt'],
  css: [
    '@fontsource/inter/400.css',
    '@fontsource/inter/500.css',
    '@fontsource/inter/600.css',
    '@fontsource/jetbrains-mono/400.css',
    '@fontsource/jetbrains-mono/500.css',
  ],
  app: {
    head: {
      htmlAttrs: { lang: 'en' },
      title: 'Arcwise',
      meta: [{ name: 'viewport', content: 'width=device-width, initial-scale=1' }],
    },
  },
  tailwindcss: { viewer: false, exposeConfig: false, cssPath: '~/assets/css/main.css' },
  runtimeConfig: {
    databaseUrl: '',
    appUrl: 'http://localhost:3000',
    smtp: { host: '127.0.0.1', port: 2525, from: 'Arcwise <no-reply@arcwise.invalid>' },
    // URL of the local SMTP fake's message list; empty outside development and tests.
    mailCaptureUrl: '',
    signIn: { maxFailures: 5, lockMinutes: 15 },
    // Requests per API key per minute; console changes (non-GET console calls) per user per
    // minute. perMinute 0 turns both off (a deployment whose gateway limits everything).
    // verifyPerMinute: public certificate checks per client address (0 = off).
    rateLimit: { perMinute: 1200, consolePerMinute: 120, verifyPerMinute: 60 },
    // CIDRs of the reverse proxies whose X-Forwarded-For and X-Forwarded-Proto are believed.
    trustedProxies: '',
    // NUXT_SEALING_KEYS: "id:secret" pairs, oldest first; the newest seals (server/utils/keyring.ts).
    sealingKeys: '',
    ingest: {
      // The byte cap of an acquisition upload (JSON or file); other routes take 1 MB.
      maxUploadBytes: 64 * 1024 * 1024,
      // An acquiredAt later than the server's clock plus this is refused.
      clockSkewSeconds: 300,
    },
    // The S3-compatible object store for raw data (issue 23; server/services/store): any
    // service that speaks S3 (NUXT_STORE_ENDPOINT empty: AWS S3 itself). With the bucket
    // empty the store is off and raw data stays in PostgreSQL. npm start and npm test run a
    // local s3rver and set these. retentionMinutes: how often worker processes apply the
    // labs' raw-data retention.
    store: { endpoint: '', region: 'us-east-1', bucket: '', accessKeyId: '', secretAccessKey: '', forcePathStyle: false, retentionMinutes: 60 },
    // Monthly partitions of deliveries and delivery attempts (server/services/partitions):
    // worker processes make monthsAhead months after this one and apply retention every
    // checkMinutes. keepAttemptMonths / keepDeliveryMonths: months kept, this one included
    // (0 keeps all); a month holding a pending delivery is always kept.
    partitions: { monthsAhead: 2, checkMinutes: 60, keepAttemptMonths: 0, keepDeliveryMonths: 0 },
    // The benchmark's baseline route (server/routes/_bench), off unless NUXT_BENCH_ROUTES=true.
    benchRoutes: false,
    // /_bench/diagnostics (event-loop delay, peak RSS) for npm run chaos, off unless NUXT_DIAGNOSTICS=true.
    diagnostics: false,
    session: { maxAge: 60 * 60 * 12 },
    // nuxt-auth-utils' hashPassword / verifyPassword / passwordNeedsReHash read these.
    hash: { scrypt: { ...scryptParams } },
    // web (HTTP only), worker (deliveries and background work only) or both.
    processRole: 'both',
    // NUXT_METRICS_TOKEN: the bearer token /metrics asks for; empty, /metrics is not served.
    metricsToken: '',
    webhooks: {
      // Comma-separated hosts ("127.0.0.1:4100", "localhost") let past the SSRF guard:
      // development and tests only. Nothing else on loopback or private networks is reached.
      allowHosts: '',
      allowedPorts: '80,443',
      timeoutMs: 15_000,
      // Seconds to wait after each failed attempt; empty means the default of about a day.
      retrySchedule: '',
      // An endpoint failing without a success for this long is disabled and its owners told.
      disableAfterHours: 72,
      maxPayloadBytes: 256 * 1024,
      // The shortest lease; a batch is leased for as long as its sends could take at worst.
      leaseSeconds: 30,
      // Sends in flight at once per process: receivers are latency-bound (a send waits on the
      // network, not the CPU), so hundreds; each costs a socket and its buffers.
      concurrency: 256,
      // Sends in flight at once per endpoint, across every worker process, unless the endpoint
      // sets its own: a slow receiver fills these slots only (issue 22). Integrators may set
      // up to endpointMaxInFlight and a rate up to endpointMaxRatePerSecond.
      endpointInFlight: 16,
      endpointMaxInFlight: 64,
      endpointMaxRatePerSecond: 200,
      // After this many failed first tries in a row the endpoint's circuit opens: one delivery
      // (a message never tried where one is due) probes it every circuitProbeSeconds, and the
      // backlog waits for a success.
      circuitFailures: 10,
      circuitProbeSeconds: 30,
      // How often a worker looks for due deliveries (it is also woken by each new event).
      pollMs: 1000,
      // Endpoints one partner may have (409 past it): each owes a delivery per event, so the
      // count bounds the work one partner's events make (common practice, no source).
      maxEndpointsPerPartner: 25,
      // Test sends and replays (one or bulk) per partner per minute, 429 past it; 0 = off.
      testSendsPerMinute: 10,
      replaysPerMinute: 30,
    },
    reprocess: {
      // Whether this process's background work takes reprocessing jobs (NUXT_REPROCESS_WORKER=false: leave them to others).
      worker: true,
      // Acquisitions per batch: one transaction writes a batch's versions and marks its items done.
      batchSize: 25,
      // Pause between batches, leaving ingest its share of the cores (0: none).
      pauseMs: 0,
      // A worker's hold on a job, extended by each batch; a killed worker's job is taken over once it runs out.
      leaseSeconds: 60,
      pollMs: 2000,
    },
    public: { mailCapture: false },
  },
  nitro: {
    // One index per capability folder (server/services/<name>/index.ts): its public names are
    // auto-imported, the rest of the folder stays private to it.
    imports: { dirs: ['./server/services/*/index.ts'] },
    experimental: { tasks: false },
    // Static assets ship with .gz and .br siblings that Nitro serves by Accept-Encoding: the
    // entry script and fonts were sent uncompressed (issue 21, point 10).
    compressPublicAssets: { gzip: true, brotli: true },
  },
  hooks: {
    // Every page announced the API reference's 2.7 MB bundle and each of the 60 font subsets
    // as <link rel="prefetch">: a first visit to /sign-in moved 3.6 MB. Pages already load
    // their own chunks on navigation and the browser fetches a font face only when a glyph
    // needs it, so neither is prefetched; /docs loads its bundle when it is opened.
    'build:manifest'(manifest) {
      for (const chunk of Object.values(manifest)) {
        if (chunk.isEntry) chunk.dynamicImports = []
        if (chunk.resourceType === 'font' || /\.woff2?$/.test(chunk.file)) chunk.prefetch = false
      }
    },
    'nitro:config'(config) {
      const existing = [config.errorHandler].flat().filter((h): h is string => typeof h === 'string')
      config.errorHandler = [problemErrorHandler, ...existing]
    },
  },
  // API reference at /docs, rendered in the browser (recipe in ../shared/STACK.md: the
  // server build of @scalar/nuxt 0.5 fails without the transpile and client-only rules).
  scalar: {
    url: '/api/v1/openapi.json',
    pathRouting: { basePath: '/docs' },
    metaData: { title: 'Arcwise API' },
    withDefaultFonts: false,
    hideClientButton: true,
    devtools: false,
    // Nothing leaves for another host: no hosted assistant, no developer-tools bar, no telemetry.
    agent: { disabled: true },
    showDeveloperTools: 'never',
    telemetry: false,
    // Arcwise's own colours (app/assets/css/main.css) and fonts, so /docs reads as part of the hub.
    customCss: [
      'body.light-mode, body.light-mode .t-doc__sidebar { --scalar-background-1: rgb(255 255 255); --scalar-background-2: rgb(247 246 243); --scalar-background-3: rgb(240 238 233); --scalar-border-color: rgb(214 211 203); --scalar-color-1: rgb(28 30 33); --scalar-color-2: rgb(88 92 99); --scalar-color-3: rgb(88 92 99); --scalar-color-accent: rgb(14 107 110); --scalar-sidebar-color-active: rgb(14 107 110); --scalar-button-1: rgb(14 107 110); --scalar-button-1-color: rgb(255 255 255); }',
      'body.dark-mode, body.dark-mode .t-doc__sidebar { --scalar-background-1: rgb(20 22 25); --scalar-background-2: rgb(29 32 36); --scalar-background-3: rgb(38 42 47); --scalar-border-color: rgb(62 67 74); --scalar-color-1: rgb(232 230 225); --scalar-color-2: rgb(168 172 178); --scalar-color-3: rgb(168 172 178); --scalar-color-accent: rgb(86 196 193); --scalar-sidebar-color-active: rgb(86 196 193); --scalar-button-1: rgb(86 196 193); --scalar-button-1-color: rgb(10 30 30); }',
      ':root { --scalar-font: Inter, ui-sans-serif, system-ui, sans-serif; --scalar-font-code: "JetBrains Mono", ui-monospace, monospace; --scalar-radius: 6px; }',
    ].join('\n'),
  },
  build: { transpile: [/@scalar/] },
  routeRules: { '/docs': { ssr: false }, '/docs/**': { ssr: false } },
  typescript: { strict: true },
  eslint: { config: { stylistic: false } },
})
