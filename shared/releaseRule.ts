import type { ReleasePolicy } from './schemas/lifecycle'

/**
 * The automatic-release rule (issue 20): under the 'auto' policy a result (or a sequence's
 * outcome) is released at once when every QC flag it raised is one the lab accepts without a
 * person (`allows`); any other flag holds it for review. Under 'review' everything waits.
 */
export function releasesAutomatically(policy: ReleasePolicy, allows: readonly string[], flagCodes: readonly string[]): boolean {
  if (policy !== 'auto') return false
  const accepted = new Set(allows)
  return flagCodes.every(code => accepted.has(code))
}
