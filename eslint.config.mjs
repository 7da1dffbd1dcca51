import withNuxt from './.nuxt/eslint.config.mjs'

export default withNuxt(
  { ignores: ['drizzle/**', 'openapi/**', '.data/**', '.output/**', 'test-results/**'] },
  // Tests read response bodies of many shapes; they assert on them instead of typing them.
  { files: ['tests/**'], rules: { '@typescript-eslint/no-explicit-any': 'off' } },
)
