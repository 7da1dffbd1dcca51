import { createHash, randomBytes } from 'node:crypto'
import { existsSync, readFileSync, writeFileSync } from 'node:fs'
import { join } from 'node:path'
import postgres from 'postgres'
import { demoLabs, demoPartners, demoReleaseRules, demoUsers, everyQcCode } from './demo'
import { demoCalibration, demoInstruments } from './demo-instruments'
import { hashPassword } from './password'
import { dataDir, log } from './paths'

/** Lab keys the demo seed issued, by lab slug, for the lab simulator (kept under .data/). */
export const demoKeysFile = join(dataDir, 'demo-keys.json')
export function readDemoKeys(): Record<string, string> {
  return existsSync(demoKeysFile) ? JSON.parse(readFileSync(demoKeysFile, 'utf8')) as Record<string, string> : {}
}

/**
 * Seeds the demo consortium once: a database that has labs already is left alone. With
 * `releaseAll` (benchmarks, the soak) every lab releases every result at once, so what they
 * post reaches partners as it did before review existed.
 */
export async function seedDemo(url: string, opts: { keysFile?: string, releaseAll?: boolean } = {}): Promise<boolean> {
  const sql = postgres(url, { max: 1, onnotice: () => {} })
  try {
    const [{ count }] = await sql<[{ count: number }]>`select count(*)::int as count from labs`
    if (count > 0) return false
    await sql.begin(async (tx) => {
      const labIds = new Map<string, string>()
      for (const lab of demoLabs) {
        const rule = opts.releaseAll ? { policy: 'auto', allows: everyQcCode, fourEyes: false } : demoReleaseRules[lab.slug] ?? { policy: 'review', allows: [], fourEyes: false }
        const [row] = await tx`insert into labs (slug, name, site, contact_email, release_policy, auto_release_allows, four_eyes)
                               values (${lab.slug}, ${lab.name}, ${lab.site}, ${lab.contactEmail}, ${rule.policy}, ${rule.allows}, ${rule.fourEyes}) returning id`
        labIds.set(lab.slug, row!.id)
      }
      const partnerIds = new Map<string, string>()
      for (const p of demoPartners) {
        const [row] = await tx`insert into partners (slug, name, kind, contact_email) values (${p.slug}, ${p.name}, ${p.kind}, ${p.contactEmail}) returning id`
        partnerIds.set(p.slug, row!.id)
      }
      for (const u of demoUsers) {
        const labId = u.lab ? labIds.get(u.lab)! : null
        const partnerId = u.partner ? partnerIds.get(u.partner)! : null
        await tx`insert into users (email, name, password_hash, role, lab_id, partner_id)
                 values (${u.email}, ${u.name}, ${await hashPassword(u.password)}, ${u.role}, ${labId}, ${partnerId})`
      }
      const keys: Record<string, string> = {}
      for (const inst of demoInstruments) {
        const labId = labIds.get(inst.lab)!
        const [row] = await tx`insert into instruments (lab_id, slug, name, measured_species) values (${labId}, ${inst.slug}, ${inst.name}, ${inst.measuredSpecies ?? null}) returning id`
        await tx`insert into geometry_versions (instrument_id, version, kind, params, valid_from, note)
                 values (${row!.id}, 1, ${inst.geometry.kind}, ${tx.json(inst.geometry as never)}, '2026-01-01T00:00:00Z', 'as installed')`
        // A history to look at: the noble-gas sector's radius re-measured after a service five
        // days ago, and the carbonate bench calibrated against its reference gas six days ago.
        if (inst.geometry.kind === 'potential-sector' && inst.slug === 'noble-gas-1') {
          const serviced = { ...inst.geometry, analyzerRadius: { ...inst.geometry.analyzerRadius, u: inst.geometry.analyzerRadius.u / 2 } }
          await tx`insert into geometry_versions (instrument_id, version, kind, params, valid_from, note)
                   values (${row!.id}, 2, ${serviced.kind}, ${tx.json(serviced as never)}, ${new Date(Date.now() - 5 * 86_400_000)}, 'radius re-measured after source service')`
        }
        if (inst.slug === 'irms-north') {
          const { points, fit } = demoCalibration(inst)
          await tx`insert into calibrations (instrument_id, version, fit, points, valid_from)
                   values (${row!.id}, 1, ${tx.json(fit as never)}, ${tx.json(points as never)}, ${new Date(Date.now() - 6 * 86_400_000)})`
        }
        // Same key format as the API issues: awk_<12-character prefix>_<43-character secret>.
        const prefix = randomBytes(9).toString('base64url')
        const secret = `awk_${prefix}_${randomBytes(32).toString('base64url')}`
        await tx`insert into api_keys (lab_id, name, prefix, secret_hash, scopes)
                 values (${labId}, 'Lab simulator (demo)', ${prefix}, ${createHash('sha256').update(secret).digest('hex')}, ${['acquisitions:write', 'results:read']})`
        keys[inst.lab] = secret
      }
      // Grants: each partner receives one lab's released results (and their corrections and
      // retractions), normalised too once a sequence is released; each partner has one client.
      const demoGrants: [string, string][] = [['saltmarsh-isotopes', 'northgate-water'], ['kestrel-leaktest', 'northgate-water'], ['halvard-ridge', 'tidewater-clinical']]
      for (const [lab, partner] of demoGrants) {
        await tx`insert into grants (lab_id, partner_id, event_types) values (${labIds.get(lab)!}, ${partnerIds.get(partner)!}, ${['result.released', 'result.corrected', 'result.retracted', 'sequence.processed']})`
      }
      for (const p of demoPartners) {
        const clientId = `awc_${randomBytes(9).toString('base64url')}`
        const clientSecret = `awcs_${randomBytes(32).toString('base64url')}`
        await tx`insert into partner_clients (partner_id, name, client_id, secret_hash, scopes)
                 values (${partnerIds.get(p.slug)!}, 'Demo client', ${clientId}, ${createHash('sha256').update(clientSecret).digest('hex')}, ${['results:read', 'events:read', 'peaks:read']})`
        keys[`partner:${p.slug}`] = `${clientId}:${clientSecret}`
      }
      if (opts.keysFile) writeFileSync(opts.keysFile, JSON.stringify(keys, null, 2), { mode: 0o600 })
      await tx`insert into audit_log (actor_label, action, detail) values ('seed', 'demo.seeded', ${tx.json({ labs: demoLabs.length, partners: demoPartners.length, users: demoUsers.length, instruments: demoInstruments.length })})`
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
