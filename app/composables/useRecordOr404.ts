/**
 * The record a console page is about, fetched for SSR; when it is not there (or not the
 * user's, which the server answers the same way) the page becomes the error page.
 */
export async function useRecordOr404<T>(url: string, what: string) {
  const result = await useFetch<T>(url)
  if (result.error.value) throw createError({ statusCode: result.error.value.statusCode ?? 404, statusMessage: `No such ${what}`, fatal: true })
  return result
}
