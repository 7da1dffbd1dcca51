import { defineStore } from 'pinia'
import { can, type Permission, type SessionUser } from '#shared/types/roles'

/** The signed-in user as the server knows them (reloaded, never trusted from the cookie). */
export const useAccountStore = defineStore('account', () => {
  const user = ref<SessionUser | null>(null)
  const loaded = ref(false)

  async function load(force = false) {
    if (loaded.value && !force) return user.value
    const headers = import.meta.server ? useRequestHeaders(['cookie']) : undefined
    user.value = await $fetch('/api/console/me', { headers }).catch(() => null)
    loaded.value = true
    return user.value
  }

  function signedIn(u: SessionUser) {
    user.value = u
    loaded.value = true
  }

  async function signOut() {
    await $fetch('/api/console/session', { method: 'DELETE' })
    user.value = null
    await navigateTo('/sign-in')
  }

  const allows = (permission: Permission) => can(user.value?.role, permission)
  return { user, loaded, load, signedIn, signOut, allows }
})
