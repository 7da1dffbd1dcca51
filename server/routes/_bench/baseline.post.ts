import { sql } from 'drizzle-orm'

// The benchmark's baseline (npm run bench:ingest): the same body, parsed and inserted as one
// row, with none of Arcwise's work. Exists only when NUXT_BENCH_ROUTES=true.
export default defineEventHandler(async (event) => {
  if (!useRuntimeConfig().benchRoutes) throw problem(404, 'not-found', 'No such route.')
  const raw = await readRawBody(event, 'utf8')
  const body = JSON.parse(raw ?? '{}') as Record<string, unknown>
  await useDb().execute(sql`insert into bench_baseline (body) values (${JSON.stringify(body)}::jsonb)`)
  setResponseStatus(event, 201)
  return { ok: true }
})
