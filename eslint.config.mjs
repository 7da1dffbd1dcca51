import { createNodeResolver, importX } from 'eslint-plugin-import-x'
import regexp from 'eslint-plugin-regexp'
import withNuxt from './.nuxt/eslint.config.mjs'

export default withNuxt(
  { ignores: ['drizzle/**', 'openapi/**', '.data/**', '.output/**', 'test-results/**'] },
  // Tests read response bodies of many shapes; they assert on them instead of typing them.
  { files: ['tests/**'], rules: { '@typescript-eslint/no-explicit-any': 'off' } },
  // Regular expressions that can take super-linear time on a crafted string (one request
  // could hold the event loop for minutes) are errors everywhere.
  {
    plugins: { regexp },
    rules: {
      'regexp/no-super-linear-backtracking': 'error',
      'regexp/no-super-linear-move': 'error',
      'regexp/no-misleading-capturing-group': 'error',
      'regexp/optimal-quantifier-concatenation': 'error',
      'regexp/no-useless-backreference': 'error',
      'regexp/no-potentially-useless-backreference': 'error',
    },
  },
  // Request bodies are read through server/utils/requestBody.ts, which counts bytes against
  // the route's cap; nothing else reads the socket or buffers a multipart body whole.
  {
    files: ['server/**'],
    ignores: ['server/utils/requestBody.ts'],
    rules: {
      'no-restricted-syntax': ['error',
        { selector: 'MemberExpression[object.property.name="node"][property.name="req"]', message: 'Read request bodies with readBodyStream / readBodyText / readValidBody (server/utils/requestBody.ts).' },
        { selector: 'CallExpression[callee.name=/^(readMultipartFormData|readFormData)$/]', message: 'Multipart bodies are streamed with busboy through readBodyStream (server/services/ingest/uploads.ts).' },
      ],
    },
  },
  // No import cycles in the server or in shared/: a capability imports another's index and
  // is never imported back by it (server/services/<capability>/index.ts). Auto-imports are
  // not seen here, so services import what they use from other capabilities explicitly.
  {
    files: ['server/**/*.ts', 'shared/**/*.ts'],
    plugins: { 'import-x': importX },
    settings: {
      'import-x/resolver-next': [createNodeResolver({ extensions: ['.ts', '.mjs', '.js', '.json'] })],
      'import-x/extensions': ['.ts', '.mjs', '.js'],
      'import-x/parsers': { '@typescript-eslint/parser': ['.ts'] },
    },
    rules: { 'import-x/no-cycle': ['error', { ignoreExternal: true }] },
  },
)
