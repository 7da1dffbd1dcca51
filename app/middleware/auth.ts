import type { Permission } from '#shared/types/roles'

// Console pages need a signed-in user, and the page's `permission` (if it names one).
export default defineNuxtRouteMiddleware(async (to) => {
  const account = useAccountStore()
  const user = await account.load()
  if (!user) return navigateTo({ path: '/sign-in', query: { next: to.fullPath } })
  const permission = to.meta.permission as Permission | undefined
  if (permission && !account.allows(permission)) {
    return abortNavigation(createError({ statusCode: 403, statusMessage: 'Your role may not open this page.' }))
  }
})
