import { sql, type AnyColumn, type SQL } from 'drizzle-orm'

// Cursor pages in a stable order: newest first, ties broken by id. The cursor keeps
// PostgreSQL's microsecond timestamp as text (select it as `at: sql<string>\`${column}::text\``):
// a JavaScript Date would round it to the millisecond and skip rows of the same millisecond.

interface CursorKey { at: string, id: string }

function encodeCursor({ at, id }: CursorKey): string {
  return Buffer.from(`${at}|${id}`).toString('base64url')
}

function decodeCursor(cursor: string): CursorKey {
  const [at, id] = Buffer.from(cursor, 'base64url').toString().split('|')
  if (!id || !at || Number.isNaN(Date.parse(at)) || !/^[0-9a-f-]{36}$/.test(id)) throw fieldProblem('cursor', 'is not a cursor this API gave out', 400)
  return { at, id }
}

/** The condition for the rows after `cursor` in (time, id) descending order: 400 for a cursor this API did not give out. */
export function afterCursor(cursor: string, time: AnyColumn, id: AnyColumn): SQL {
  const c = decodeCursor(cursor)
  return sql`(${time}, ${id}) < (${c.at}::timestamptz, ${c.id}::uuid)`
}

/** A page from rows fetched with `limit + 1`: the first `limit`, and the cursor of the last when more follow. */
export function cursorPage<R extends CursorKey>(rows: R[], limit: number): { items: R[], nextCursor: string | null } {
  const items = rows.slice(0, limit)
  return { items, nextCursor: rows.length > limit ? encodeCursor(items.at(-1)!) : null }
}
