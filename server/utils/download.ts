import type { H3Event } from 'h3'

/** Answers with a file to download: its content type and attachment name as headers, its body as the answer. */
export function sendDownload<B extends string | Buffer>(event: H3Event, file: { contentType: string, disposition: string, body: B }) {
  setResponseHeaders(event, { 'content-type': file.contentType, 'content-disposition': file.disposition })
  return file.body
}
