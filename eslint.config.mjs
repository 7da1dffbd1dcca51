import withNuxt from './.nuxt/eslint.config.mjs'

export default withNuxt({
  ignores: ['drizzle/**', 'openapi/**', '.data/**', '.output/**', 'test-results/**'],
})
