import { isotopeAttentionFor } from '../../../services/isotopeViews'

// Rule violations and failed sequences for the overview: a lab manager's own lab, every lab for
// those who may read labs; nothing for the rest.
export default defineEventHandler(async (event) => {
  const user = await requirePermission(event, 'labs:read')
  return isotopeAttentionFor(user.role === 'lab_manager' ? (user.labId ? [user.labId] : []) : null)
})
