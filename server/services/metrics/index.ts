// Metrics for operators, in the Prometheus text format (prom-client) at /metrics. Counters
// and histograms are kept per process (scrape each web and worker process); the queue and
// database gauges are read from PostgreSQL when scraped, so every process reports the same
// hub-wide figures and an operator may scrape just one for them.
export { metricsText, observeRequest, observeEngine, observeDeliveryAttempt, observeStoreCall } from './registry'
