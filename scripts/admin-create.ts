// Creates the first admin of a real deployment: npm run admin:create -- --email a@b --name "A B"
// The password is read from ARCWISE_ADMIN_PASSWORD or typed at the prompt.
import { createInterface } from 'node:readline/promises'
import { parseArgs } from 'node:util'
import postgres from 'postgres'
import { z } from 'zod'
import { newPassword } from '../shared/schemas/auth'
import { email, displayName } from '../shared/schemas/common'
import { hashPassword } from './lib/password'

const { values } = parseArgs({ options: { email: { type: 'string' }, name: { type: 'string' } } })
const url = process.env.DATABASE_URL
if (!url) { console.error('DATABASE_URL is not set'); process.exit(2) }

let password = process.env.ARCWISE_ADMIN_PASSWORD
if (!password) {
  const rl = createInterface({ input: process.stdin, output: process.stdout })
  password = await rl.question('Password for the new admin: ')
  rl.close()
}
const parsed = z.object({ email, name: displayName, password: newPassword }).safeParse({ email: values.email, name: values.name, password })
if (!parsed.success) {
  for (const issue of parsed.error.issues) console.error(`${issue.path.join('.')}: ${issue.message}`)
  process.exit(2)
}
const sql = postgres(url, { max: 1, onnotice: () => {} })
try {
  const [existing] = await sql`select 1 from users where email = ${parsed.data.email}`
  if (existing) { console.error(`email: a user with ${parsed.data.email} exists already`); process.exitCode = 2 }
  else {
    await sql.begin(async (tx) => {
      const [u] = await tx`insert into users (email, name, password_hash, role) values (${parsed.data.email}, ${parsed.data.name}, ${await hashPassword(parsed.data.password)}, 'admin') returning id`
      await tx`insert into audit_log (actor_label, action, target_type, target_id) values ('admin:create', 'user.created', 'user', ${u!.id})`
    })
    console.log(`admin ${parsed.data.email} created`)
  }
}
finally { await sql.end() }
