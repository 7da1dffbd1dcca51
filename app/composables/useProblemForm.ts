import type { z } from 'zod'
import type { ProblemDocument } from '#shared/schemas/common'

const CHECK_FIELDS = 'Check the fields marked below.'

/**
 * Form state checked with the same zod schema the server uses, and server problem
 * documents shown on the fields they name.
 */
export function useProblemForm<S extends z.ZodType>(schema: S, initial: z.input<S>) {
  const values = reactive({ ...(initial as object) }) as z.input<S>
  const fieldErrors = ref<Record<string, string>>({})
  const message = ref<string | null>(null)
  const pending = ref(false)

  // An error stays while its field holds what was refused; once the field changes it is
  // checked again with the schema and the error goes when the schema no longer names it
  // (a server refusal, which the schema cannot repeat, goes as soon as the field changes).
  const refused = new Map<string, string>()
  const valueAt = (path: string) => JSON.stringify(path.split('.').reduce<unknown>((o, k) => (o !== null && typeof o === 'object' && Object.hasOwn(o, k)) ? (o as Record<string, unknown>)[k] : undefined, values)) ?? ''
  function remember() {
    refused.clear()
    for (const path of Object.keys(fieldErrors.value)) refused.set(path, valueAt(path))
  }
  watch(() => JSON.stringify(values), () => {
    const changed = [...refused].filter(([path, was]) => valueAt(path) !== was).map(([path]) => path)
    if (!changed.length) return
    const parsed = schema.safeParse(values)
    const still = new Map<string, string>()
    if (!parsed.success) for (const issue of parsed.error.issues) { const p = issue.path.map(String).join('.'); if (!still.has(p)) still.set(p, issue.message) }
    for (const path of changed) {
      const issue = still.get(path)
      if (issue) refused.set(path, valueAt(path))
      else refused.delete(path)
    }
    const next = Object.fromEntries(Object.entries(fieldErrors.value).flatMap(([path, text]) =>
      !changed.includes(path) ? [[path, text]] : still.has(path) ? [[path, still.get(path)!]] : []))
    fieldErrors.value = next
    if (!Object.keys(next).length && message.value === CHECK_FIELDS) message.value = null
  })

  function showProblem(error: unknown) {
    const doc = (error as { data?: ProblemDocument }).data
    fieldErrors.value = {}
    if (doc?.errors?.length) {
      for (const e of doc.errors) fieldErrors.value[e.path] = e.message
      message.value = doc.errors.some(e => !(e.path in (values as object))) ? (doc.detail ?? doc.title) : CHECK_FIELDS
      remember()
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
      message.value = CHECK_FIELDS
      remember()
      return false
    }
    pending.value = true
    try { await action(parsed.data); return true }
    catch (error) { showProblem(error); return false }
    finally { pending.value = false }
  }

  return { values, fieldErrors, message, pending, submit, showProblem }
}
