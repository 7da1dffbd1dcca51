import type postgres from 'postgres'
import { sealWith, sealedWithNewest, unsealWith, type SealingKeyring } from '../../server/utils/keyring'

/** Every sealed column: table, its key column, and the sealed text columns. */
export const sealedColumns = [
  { table: 'signing_keys', key: 'kid', columns: ['sealed_private_jwk'] },
  { table: 'webhook_endpoints', key: 'id', columns: ['sealed_secret', 'previous_sealed_secret'] },
] as const

/**
 * Re-seals every sealed value that is not under the ring's newest key, row by row under a
 * row lock, in one transaction: either all move to the newest key or none do. Values the
 * ring cannot open stop the run before anything is written.
 */
export async function rotateSealedValues(sql: postgres.Sql, ring: SealingKeyring): Promise<{ resealed: number, current: number }> {
  if (!ring.keys.length) throw new Error('NUXT_SEALING_KEYS is empty: there is no newest key to re-seal with')
  let resealed = 0
  let current = 0
  await sql.begin(async (tx) => {
    for (const { table, key, columns } of sealedColumns) {
      const rows = await tx.unsafe(`select "${key}" as key, ${columns.map(c => `"${c}"`).join(', ')} from "${table}" for update`)
      for (const row of rows) {
        const changed: Record<string, string> = {}
        for (const column of columns) {
          const sealed = row[column] as string | null
          if (!sealed) continue
          if (sealedWithNewest(ring, sealed)) { current++; continue }
          changed[column] = sealWith(ring, unsealWith(ring, sealed))
        }
        const names = Object.keys(changed)
        if (!names.length) continue
        await tx.unsafe(`update "${table}" set ${names.map((c, i) => `"${c}" = $${i + 1}`).join(', ')} where "${key}" = $${names.length + 1}`, [...names.map(c => changed[c]!), row.key as string])
        resealed += names.length
      }
    }
  })
  return { resealed, current }
}
