// The pure part of claiming object keys for a turn's acquisitions together (objects.ts,
// claimObjects): what one statement sends, and which acquisition may treat a key as fresh.
// Unit-tested in tests/unit/store-claim-plan.test.ts.

export interface KeyClaim { key: string, bytes: number }

/**
 * Each key once, sorted: PostgreSQL refuses an INSERT ... ON CONFLICT DO UPDATE that meets one
 * row twice, and two statements that lock shared keys in one order cannot deadlock on them.
 */
export function claimList(requests: KeyClaim[][]): KeyClaim[] {
  const wanted = new Map<string, number>()
  for (const request of requests) for (const o of request) if (!wanted.has(o.key)) wanted.set(o.key, o.bytes)
  return [...wanted].sort(([a], [b]) => a < b ? -1 : a > b ? 1 : 0).map(([key, bytes]) => ({ key, bytes }))
}

/**
 * Per request, the keys it may write without asking the store first: those the statement
 * inserted, each given to the first request that named it only (the others ask, as for a key
 * claimed already).
 */
export function freshKeys(requests: KeyClaim[][], inserted: Iterable<string>): Set<string>[] {
  const left = new Set(inserted)
  return requests.map(request => new Set(request.filter(o => left.delete(o.key)).map(o => o.key)))
}
