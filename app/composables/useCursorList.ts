import type { Ref } from 'vue'

interface CursorPage<T> { items: T[], nextCursor: string | null }

/**
 * A console list read page by page with the server's opaque cursor (newest first): the first
 * page through useFetch (rendered on the server, fetched again when `query` changes or on
 * `refresh`), older pages appended by the table's "Show more". A new first page drops the
 * older pages read before it, so a changed filter never mixes two lists. Every ref and
 * watcher is made before the first await, while the page's setup context is current.
 */
export async function useCursorList<T>(url: string, query: Readonly<Ref<Record<string, string | undefined>>>) {
  const fetched = useFetch<CursorPage<T>>(url, { query })
  const page = fetched.data
  const older = ref([]) as Ref<T[]>
  const olderCursor = ref<string | null | undefined>(undefined)
  watch(page, () => { older.value = []; olderCursor.value = undefined })
  const items = computed(() => [...(page.value?.items ?? []), ...older.value])
  const nextCursor = computed(() => olderCursor.value === undefined ? page.value?.nextCursor ?? null : olderCursor.value)
  const loadingMore = ref(false)
  async function loadMore() {
    loadingMore.value = true
    try {
      const more = await $fetch<CursorPage<T>>(url, { query: { ...query.value, cursor: nextCursor.value ?? undefined } })
      older.value.push(...more.items)
      olderCursor.value = more.nextCursor
    }
    finally { loadingMore.value = false }
  }
  await fetched
  return { items, nextCursor, loadingMore, loadMore, refresh: fetched.refresh }
}
