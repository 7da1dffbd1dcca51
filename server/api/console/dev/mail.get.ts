import type { CapturedMail } from '#shared/schemas/responses'

// Captured mail from the local SMTP fake. It exists only where the fake is configured
// (development and tests), and is open to everyone there so a person who is not signed
// in yet can open an invitation or reset link.
export default defineEventHandler(async () => {
  const { mailCaptureUrl } = useRuntimeConfig()
  if (!mailCaptureUrl) throw problem(404, 'not-found', 'Mail capture is not enabled on this deployment.')
  const items = await $fetch<CapturedMail[]>(mailCaptureUrl).catch(() => {
    throw problem(503, 'mail-capture-unavailable', 'The local mail fake does not answer.')
  })
  return { items }
})
