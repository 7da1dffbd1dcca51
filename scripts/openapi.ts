// `npm run openapi`: writes the OpenAPI document generated from the zod schemas.
import { writeFileSync } from 'node:fs'
import { join } from 'node:path'
import { buildOpenApiDocument } from '../shared/openapi'
import { log, root } from './lib/paths'

const file = join(root, 'openapi', 'openapi.json')
writeFileSync(file, `${JSON.stringify(buildOpenApiDocument(), null, 2)}\n`)
log(`wrote ${file}`)
