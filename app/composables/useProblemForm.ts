import type { z } from 'zod'
import type { ProblemDocument } from '#shared/schemas/common'

/**
 * Form state checked with the same zod schema the server uses, and server problem
 * documents shown on the fields they name.
 */
export function useProblemForm<S extends z.ZodType>(schema: S, initial: z.input<S>) {
  const values = reactive({ ...(initial as object) }) as z.input<S>
  const fieldErrors = ref<Record<string, string>>({})
  const message = ref<string | null>(null)
  const pending = ref(false)

  function showProblem(error: unknown) {
    const doc = (error as { data?: ProblemDocument }).data
    fieldErrors.value = {}
    if (doc?.errors?.length) {
      for (const e of doc.errors) fieldErrors.value[e.path] = e.message
      message.value = doc.errors.some(e => !(e.path in (values as object))) ? (doc.detail ?? doc.title) : 'Check the fields marked below.'
    }
    else {
      message.value = doc?.detail ?? doc?.title ?? 'Something went wrong; try again.'
    }
  }

  async function submit(action: (data: z.output<S>) => Promise<unknown>) {
    message.value = null
    fieldErrors.value = {}
    const parsed = schema.safeParse(values)
    if (!parsed.success) {
      for (const issue of parsed.error.issues) fieldErrors.value[issue.path.map(String).join('.') || '(body)'] ??= issue.message
      message.value = 'Check the fields marked below.'
      return false
    }
    pending.value = true
    try { await action(parsed.data); return true }
    catch (error) { showProblem(error); return false }
    finally { pending.value = false }
  }

  return { values, fieldErrors, message, pending, submit, showProblem }
}
