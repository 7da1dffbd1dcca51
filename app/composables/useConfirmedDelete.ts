import type { ProblemDocument } from '#shared/schemas/common'

/**
 * A DELETE the person confirms first (revoking a key, a grant, a client), then the list is
 * fetched again; a refusal's problem detail lands in `error`.
 */
export function useConfirmedDelete(refresh: () => Promise<unknown>) {
  const error = ref<string | null>(null)
  async function confirmAndDelete(url: string, question: string, fallback: string) {
    if (!confirm(question)) return
    error.value = null
    await $fetch(url, { method: 'DELETE' }).catch((e: { data?: ProblemDocument }) => { error.value = e.data?.detail ?? fallback })
    await refresh()
  }
  return { error, confirmAndDelete }
}
