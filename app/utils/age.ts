/**
 * How long ago an instant was, in the coarse words a person scans a home page with
 * ("today", "3 days ago", "5 h ago"); coarse on purpose, so the server's and the browser's
 * renderings agree.
 */
export function ageText(at: string | Date, now = Date.now()): string {
  const ms = now - new Date(at).getTime()
  if (ms < 0) return 'in the future'
  const hours = Math.floor(ms / 3_600_000)
  if (hours < 1) return 'within the hour'
  if (hours < 24) return `${hours} h ago`
  const days = Math.floor(hours / 24)
  return days === 1 ? 'yesterday' : `${days} days ago`
}

/** Whole days since an instant. */
export function ageDays(at: string | Date, now = Date.now()): number {
  return Math.floor((now - new Date(at).getTime()) / 86_400_000)
}
