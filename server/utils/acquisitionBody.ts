import type { H3Event } from 'h3'
import { acquisitionInput, type AcquisitionInput } from '#shared/schemas/acquisitions'
import type { QueryMeta } from '../services/ingest'

/** The metadata the query string gives beside a file. */
function queryMeta(event: H3Event): QueryMeta {
  const q = getQuery(event)
  const out: QueryMeta = {}
  for (const k of ['instrument', 'runId', 'acquiredAt', 'sampleRef'] as const) if (typeof q[k] === 'string') out[k] = q[k]
  return out
}

/**
 * The acquisition body of the request, whatever form it came in (JSON, a file as the raw
 * body, or one multipart part), read through the request's byte counter.
 */
export function readAcquisitionBody(event: H3Event): Promise<AcquisitionInput> {
  // The bytes as received go to the object store once the acquisition is accepted (receivedBody).
  keepReceivedBody(event)
  return acquisitionFromBody({
    contentType: getRequestHeader(event, 'content-type') ?? '',
    meta: queryMeta(event),
    stream: () => readBodyStream(event),
    json: () => readValidBody(event, acquisitionInput),
  })
}
