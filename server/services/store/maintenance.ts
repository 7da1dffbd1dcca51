import { createHash } from 'node:crypto'
import type postgres from 'postgres'
import { encodeArrays } from './arrays'

// The store's two maintenance jobs, written against postgres.js and a minimal store interface
// so that the server (worker processes, on a timer) and the commands (npm run store:migrate,
// npm run store:retention) run the same code. No Nitro imports here.

export interface ObjectStoreAccess {
  /** Stores the object unless one of that key and size is there (deduplication). */
  put: (kind: 'raw' | 'arrays', sha256: string, data: Buffer, contentType: string) => Promise<void>
  remove: (kind: 'raw' | 'arrays', sha256: string) => Promise<void>
}

const sha256Of = (data: Buffer) => createHash('sha256').update(data).digest('hex')

async function claim(sql: postgres.Sql, objects: { key: string, bytes: number }[]) {
  await sql`insert into store_objects ${sql(objects.map(o => ({ key: o.key, bytes: o.bytes })))}
    on conflict (key) do update set claimed_at = now()`
}

/**
 * Moves the JSON payloads of rows from before the store into it: for each acquisition with a
 * payload and no reference, both objects are written (the payload's JSON text as the raw body,
 * the arrays object), then the row gets the references and its payload column is cleared, in
 * one UPDATE that still requires the payload to be there. Resumable (stop it at any point and
 * run it again) and idempotent (a row moved is skipped; an object already there is not written
 * again). Returns how many rows it moved.
 */
export async function moveLegacyPayloads(sql: postgres.Sql, store: ObjectStoreAccess, opts: { batch?: number, onProgress?: (moved: number) => void } = {}): Promise<number> {
  let moved = 0
  for (;;) {
    const rows = await sql<{ id: string, payload: string }[]>`
      select id, payload::text as payload from acquisitions
      where payload is not null and arrays_sha256 is null and raw_removed_at is null
      order by created_at, id limit ${opts.batch ?? 20}`
    if (!rows.length) return moved
    for (const row of rows) {
      const raw = Buffer.from(row.payload, 'utf8')
      const arrays = encodeArrays(JSON.parse(row.payload) as object)
      const rawSha = sha256Of(raw)
      const arraysSha = sha256Of(arrays)
      await claim(sql, [{ key: `raw/${rawSha}`, bytes: raw.length }, { key: `arrays/${arraysSha}`, bytes: arrays.length }])
      await store.put('raw', rawSha, raw, 'application/json')
      await store.put('arrays', arraysSha, arrays, 'application/vnd.arcwise.arrays')
      const done = await sql`
        update acquisitions set raw_sha256 = ${rawSha}, raw_bytes = ${raw.length}, raw_content_type = 'application/json',
          arrays_sha256 = ${arraysSha}, arrays_bytes = ${arrays.length}, payload = null
        where id = ${row.id} and payload is not null and arrays_sha256 is null`
      moved += done.count
      opts.onProgress?.(moved)
    }
  }
}

export interface RetentionOutcome { acquisitionsExpired: number, objectsDeleted: number }

/**
 * Retention per lab (labs.raw_retention_days; null keeps raw data forever). First every
 * acquisition received more than its lab's days ago is marked `raw_removed_at` (its old JSON
 * payload, if any, cleared); its results stay. Then each object of the store that no live row
 * references (an acquisition whose raw data is kept, an upload not yet processed) and whose
 * last claim is older than `graceSeconds` is deleted, each under its store_objects row's lock,
 * so that a writer claiming it meanwhile either waits and then writes it again, or keeps it.
 * With the store off (`store` null) only the first step runs. An object another lab's (or another kept acquisition's) row references is left alone.
 */
export async function applyRetention(sql: postgres.Sql, store: ObjectStoreAccess | null, opts: { graceSeconds?: number } = {}): Promise<RetentionOutcome> {
  const grace = opts.graceSeconds ?? 3600
  const expired = await sql`
    update acquisitions a set raw_removed_at = now(), payload = null
    from labs l
    where l.id = a.lab_id and l.raw_retention_days is not null and a.raw_removed_at is null
      and a.created_at < now() - make_interval(days => l.raw_retention_days)`
  // With the store off there are only JSON payloads, cleared above.
  if (!store) return { acquisitionsExpired: expired.count, objectsDeleted: 0 }
  const candidates = await sql<{ key: string }[]>`
    select s.key from store_objects s
    where s.claimed_at < now() - make_interval(secs => ${grace}) and not ${live(sql)}`
  let deleted = 0
  for (const { key } of candidates) {
    await sql.begin(async (tx) => {
      const [row] = await tx<{ key: string }[]>`
        select s.key from store_objects s where s.key = ${key}
          and s.claimed_at < now() - make_interval(secs => ${grace}) and not ${live(sql)}
        for update of s`
      if (!row) return
      const [kind, sha] = key.split('/') as ['raw' | 'arrays', string]
      await store.remove(kind, sha)
      await tx`delete from store_objects where key = ${key}`
      deleted++
    })
  }
  return { acquisitionsExpired: expired.count, objectsDeleted: deleted }
}

/**
 * Some kept row references store_objects row `s`. Each object is looked up in the one index of
 * its kind (acquisitions_raw_sha_idx or acquisitions_arrays_sha_idx): the kind test comes first
 * and stops the other lookup. The uploads in flight are few and read once, as a hashed set.
 * (Written with both kinds in one EXISTS, every object probed both indexes, and uploads were
 * read once per object: EXPLAIN ANALYZE over the bench database, DEVELOPERS.md, Measured.)
 */
function live(sql: postgres.Sql) {
  return sql`(
    (s.key like 'raw/%' and exists (select 1 from acquisitions a where a.raw_sha256 = substr(s.key, 5) and a.raw_removed_at is null))
    or (s.key like 'arrays/%' and exists (select 1 from acquisitions a where a.arrays_sha256 = substr(s.key, 8) and a.raw_removed_at is null))
    or s.key in (
      select 'raw/' || u.raw_sha256 from uploads u where u.status in ('pending', 'processing') and u.raw_sha256 is not null
      union all
      select 'arrays/' || u.arrays_sha256 from uploads u where u.status in ('pending', 'processing') and u.arrays_sha256 is not null))`
}
