// `npx tsx scripts/upload-templates.ts`: writes the console's upload templates into public/templates/.
import { mkdirSync, writeFileSync } from 'node:fs'
import { join } from 'node:path'
import { uploadTemplates } from './lib/uploadTemplates'
import { log, root } from './lib/paths'

const dir = join(root, 'public', 'templates')
mkdirSync(dir, { recursive: true })
for (const [name, text] of Object.entries(uploadTemplates())) writeFileSync(join(dir, name), text)
log(`wrote ${dir}`)
