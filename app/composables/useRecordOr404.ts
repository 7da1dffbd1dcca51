/**
 * The record a console page is about, fetched for SSR; when it is not there (or not the
 * user's, which the server answers the same way) the page becomes the error page. Takes the
 * page's `useFetch(…)`, so the record keeps the type Nitro infers from the route.
 */
export async function useRecordOr404<T extends { error: Ref<{ statusCode?: number } | null | undefined> }>(request: PromiseLike<T>, what: string) {
  const result = await request
  if (result.error.value) throw createError({ statusCode: result.error.value.statusCode ?? 404, statusMessage: `No such ${what}`, fatal: true })
  return result
}
