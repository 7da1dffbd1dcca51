import { defineStore } from 'pinia'

/** Light or dark, kept in a cookie so the server renders the right one first. */
export const useThemeStore = defineStore('theme', () => {
  const cookie = useCookie<'light' | 'dark'>('aw-theme', { default: () => 'light', sameSite: 'lax', maxAge: 60 * 60 * 24 * 365 })
  const dark = computed(() => cookie.value === 'dark')
  function toggle() { cookie.value = dark.value ? 'light' : 'dark' }
  return { dark, toggle }
})
