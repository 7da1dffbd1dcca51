import type { H3Event } from 'h3'

/** 413 before an oversized body is read: by Content-Length, and again while streaming. */
export function assertBodySize(event: H3Event, maxBytes: number) {
  const length = Number(getRequestHeader(event, 'content-length') ?? 0)
  if (length > maxBytes) throw problem(413, 'payload-too-large', `The body is ${length} bytes; at most ${maxBytes} are accepted here.`)
}
