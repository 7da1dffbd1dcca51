import { timingSafeEqual } from 'node:crypto'
import { metricsText } from '../services/metrics'

// Prometheus scrapes this with `Authorization: Bearer <NUXT_METRICS_TOKEN>`. Without a token
// configured the route does not exist (404), so a hub never exposes its figures by accident.
export default defineEventHandler(async (event) => {
  const token = String(useRuntimeConfig(event).metricsToken ?? '')
  if (!token) throw problem(404, 'not-found', 'No such route.')
  const given = getRequestHeader(event, 'authorization') ?? ''
  const expected = Buffer.from(`Bearer ${token}`)
  const actual = Buffer.from(given)
  if (actual.length !== expected.length || !timingSafeEqual(actual, expected)) {
    throw problem(401, 'metrics-token-required', 'Send the metrics token as a bearer token.', { headers: { 'www-authenticate': 'Bearer realm="arcwise-metrics"' } })
  }
  const { body, contentType } = await metricsText()
  setResponseHeader(event, 'content-type', contentType)
  setResponseHeader(event, 'cache-control', 'no-store')
  return body
})
