import postgres from 'postgres'
import { demoLabs, demoPartners, demoUsers } from './demo'
import { hashPassword } from './password'
import { log } from './paths'

/** Seeds the demo consortium once: a database that has labs already is left alone. */
export async function seedDemo(url: string): Promise<boolean> {
  const sql = postgres(url, { max: 1, onnotice: () => {} })
  try {
    const [{ count }] = await sql<{ count: number }[]>`select count(*)::int as count from labs`
    if (count > 0) return false
    await sql.begin(async (tx) => {
      const labIds = new Map<string, string>()
      for (const lab of demoLabs) {
        const [row] = await tx`insert into labs (slug, name, site, contact_email) values (${lab.slug}, ${lab.name}, ${lab.site}, ${lab.contactEmail}) returning id`
        labIds.set(lab.slug, row.id)
      }
      const partnerIds = new Map<string, string>()
      for (const p of demoPartners) {
        const [row] = await tx`insert into partners (slug, name, kind, contact_email) values (${p.slug}, ${p.name}, ${p.kind}, ${p.contactEmail}) returning id`
        partnerIds.set(p.slug, row.id)
      }
      for (const u of demoUsers) {
        const labId = u.lab ? labIds.get(u.lab)! : null
        const partnerId = u.partner ? partnerIds.get(u.partner)! : null
        await tx`insert into users (email, name, password_hash, role, lab_id, partner_id)
                 values (${u.email}, ${u.name}, ${await hashPassword(u.password)}, ${u.role}, ${labId}, ${partnerId})`
      }
      await tx`insert into audit_log (actor_label, action, detail) values ('seed', 'demo.seeded', ${tx.json({ labs: demoLabs.length, partners: demoPartners.length, users: demoUsers.length })})`
    })
    log('demo consortium seeded')
    return true
  }
  finally { await sql.end() }
}

export function printDemoSignIns(appUrl: string) {
  log(`Arcwise console: ${appUrl}/sign-in`)
  log('demo sign-ins (invented people of the demo consortium):')
  for (const u of demoUsers) log(`  ${u.role.padEnd(12)} ${u.email.padEnd(38)} ${u.password}`)
}
