import { isotopeAttentionFor } from '../../../services/isotopeViews'
import { isLabScoped } from '#shared/types/roles'

// Rule violations and failed sequences for the overview: a lab manager's own lab, every lab for
// those who may read labs; nothing for the rest.
export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'labs:read')
  return isotopeAttentionFor(isLabScoped(user.role) ? (user.labId ? [user.labId] : []) : null)
})
