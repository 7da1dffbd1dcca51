import { benchSendLoop } from '#shared/schemas/webhooks'

// The benchmark's third delivery figure (npm run bench:delivery): the worker's own send path
// (sign, guard, send, read the answer, classify) run `count` times, `concurrency` at a time,
// inside this server, with no claim and no record. Set beside the bare sender and the worker,
// it shows what the durable queue costs. Exists only when NUXT_BENCH_ROUTES=true.
const BENCH_SECRET = `whsec_${Buffer.from('arcwise-bench-send-loop-key-32by').toString('base64')}`

export default defineEventHandler(async (event) => {
  if (!useRuntimeConfig().benchRoutes) throw problem(404, 'not-found', 'No such route.')
  const { url, count, concurrency, body } = await readValidBody(event, benchSendLoop)
  const bytes = Buffer.from(body)
  const classes: Record<string, number> = {}
  let next = 0
  await Promise.all(Array.from({ length: concurrency }, async () => {
    while (next < count) {
      const outcome = await sendOnce(url, signedHeaders(`msg_bench_${next++}`, bytes, [BENCH_SECRET]), bytes)
      classes[outcome.class] = (classes[outcome.class] ?? 0) + 1
    }
  }))
  // The benchmark times the loop and reads every process's CPU itself; it needs to know only
  // how the sends went.
  return { sent: count, classes }
})
