// nuxt-auth-utils' own DELETE /api/_auth/session clears the cookie without our sign-out
// route: end the server-side session there too, so no path leaves a copied cookie working.
export default defineNitroPlugin(() => {
  sessionHooks.hook('clear', async (session) => {
    await endConsoleSession(session as { secure?: unknown })
  })
})
